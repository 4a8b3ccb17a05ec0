"""Published sources of the methods the briefing describes.

Each entry: key -> (short citation, full reference). The keys are used as anchors
(``#ref-<key>``) in the page. Bibliographic details were checked against the
publishers' records where marked "checked"; the rest are from memory.
"""
from __future__ import annotations

__all__ = ["REFERENCES"]

REFERENCES: dict[str, tuple[str, str]] = {
    "firth1993": ("Firth 1993", "Firth, D. (1993). Bias reduction of maximum likelihood estimates. "
                  "Biometrika 80(1): 27–38."),
    "heinze2002": ("Heinze & Schemper 2002", "Heinze, G. & Schemper, M. (2002). A solution to the problem of "
                   "separation in logistic regression. Statistics in Medicine 21(16): 2409–2419."),
    "dersimonian1986": ("DerSimonian & Laird 1986", "DerSimonian, R. & Laird, N. (1986). Meta-analysis in "
                        "clinical trials. Controlled Clinical Trials 7(3): 177–188."),
    "hartung2001": ("Hartung & Knapp 2001", "Hartung, J. & Knapp, G. (2001). On tests of the overall treatment "
                    "effect in meta-analysis with normally distributed responses. Statistics in Medicine "
                    "20(12): 1771–1782."),
    "sidik2002": ("Sidik & Jonkman 2002", "Sidik, K. & Jonkman, J. N. (2002). A simple confidence interval for "
                  "meta-analysis. Statistics in Medicine 21(21): 3153–3159."),
    # checked: J. Educ. Behav. Stat. 30(3): 261-293
    "viechtbauer2005": ("Viechtbauer 2005", "Viechtbauer, W. (2005). Bias and efficiency of meta-analytic "
                        "variance estimators in the random-effects model. Journal of Educational and Behavioral "
                        "Statistics 30(3): 261–293."),
    "higgins2002": ("Higgins & Thompson 2002", "Higgins, J. P. T. & Thompson, S. G. (2002). Quantifying "
                    "heterogeneity in a meta-analysis. Statistics in Medicine 21(11): 1539–1558."),
    # checked: Biometrics 27(4): 857-871
    "gower1971": ("Gower 1971", "Gower, J. C. (1971). A general coefficient of similarity and some of its "
                  "properties. Biometrics 27(4): 857–871."),
    "podani1999": ("Podani 1999", "Podani, J. (1999). Extending Gower's general coefficient of similarity to "
                   "ordinal characters. Taxon 48(2): 331–340."),
    # checked: Paleobiology 26(sp4): 74-102
    "foote2000": ("Foote 2000", "Foote, M. (2000). Origination and extinction components of taxonomic "
                  "diversity: general problems. Paleobiology 26(sp4): 74–102."),
    "rubin1987": ("Rubin 1987", "Rubin, D. B. (1987). Multiple Imputation for Nonresponse in Surveys. "
                  "Wiley, New York."),
    "foote2007": ("Foote et al. 2007", "Foote, M., Crampton, J. S., Beu, A. G., Marshall, B. A., Cooper, R. A., "
                  "Maxwell, P. A. & Matcham, I. (2007). Rise and fall of species occupancy in Cenozoic fossil "
                  "mollusks. Science 318(5853): 1131–1134."),
    "liow2007": ("Liow & Stenseth 2007", "Liow, L. H. & Stenseth, N. C. (2007). The rise and fall of species: "
                 "implications for macroevolutionary and macroecological studies. Proceedings of the Royal "
                 "Society B 274(1626): 2745–2752."),
    "hurvich1989": ("Hurvich & Tsai 1989", "Hurvich, C. M. & Tsai, C.-L. (1989). Regression and time series "
                    "model selection in small samples. Biometrika 76(2): 297–307."),
    "burnham2002": ("Burnham & Anderson 2002", "Burnham, K. P. & Anderson, D. R. (2002). Model Selection and "
                    "Multimodel Inference: A Practical Information-Theoretic Approach, 2nd edn. Springer, "
                    "New York."),
    "lande1988": ("Lande & Orzack 1988", "Lande, R. & Orzack, S. H. (1988). Extinction dynamics of "
                  "age-structured populations in a fluctuating environment. Proceedings of the National "
                  "Academy of Sciences USA 85(19): 7418–7421."),
    "dennis1991": ("Dennis, Munholland & Scott 1991", "Dennis, B., Munholland, P. L. & Scott, J. M. (1991). "
                   "Estimation of growth and extinction parameters for endangered species. Ecological "
                   "Monographs 61(2): 115–143."),
    "faith2008": ("Faith 2008", "Faith, D. P. (2008). Threatened species and the potential loss of "
                  "phylogenetic diversity: conservation scenarios based on estimated extinction "
                  "probabilities and phylogenetic risk analysis. Conservation Biology 22(6): 1461–1470."),
    "kendall1945": ("Kendall 1945", "Kendall, M. G. (1945). The treatment of ties in ranking problems. "
                    "Biometrika 33(3): 239–251."),
    "spearman1904": ("Spearman 1904", "Spearman, C. (1904). The proof and measurement of association between "
                     "two things. American Journal of Psychology 15(1): 72–101."),
    "hanley1982": ("Hanley & McNeil 1982", "Hanley, J. A. & McNeil, B. J. (1982). The meaning and use of the "
                   "area under a receiver operating characteristic (ROC) curve. Radiology 143(1): 29–36."),
    "brier1950": ("Brier 1950", "Brier, G. W. (1950). Verification of forecasts expressed in terms of "
                  "probability. Monthly Weather Review 78(1): 1–3."),
    "efron1993": ("Efron & Tibshirani 1993", "Efron, B. & Tibshirani, R. J. (1993). An Introduction to the "
                  "Bootstrap. Chapman & Hall, New York."),
    "signor1982": ("Signor & Lipps 1982", "Signor, P. W. & Lipps, J. H. (1982). Sampling bias, gradual "
                   "extinction patterns and catastrophes in the fossil record. Geological Society of America "
                   "Special Paper 190: 291–296."),
    "cohen2013": ("Cohen et al. 2013", "Cohen, K. M., Finney, S. C., Gibbard, P. L. & Fan, J.-X. (2013; "
                  "updated). The ICS International Chronostratigraphic Chart. Episodes 36(3): 199–204."),
    "ipcc2021": ("IPCC 2021", "IPCC (2021). Summary for Policymakers. In: Climate Change 2021: The Physical "
                 "Science Basis. Contribution of Working Group I to the Sixth Assessment Report of the "
                 "Intergovernmental Panel on Climate Change. Cambridge University Press. Table SPM.1."),
}
