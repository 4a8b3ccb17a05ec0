from analog.figures.style import short_label


def test_short_names_are_kept_and_long_ones_cut_with_an_ellipsis():
    assert short_label("Preskella") == "Preskella"
    cut = short_label("Galtrina " + "longissima" * 99, 36)
    assert len(cut) == 36 and cut.endswith("\u2026") and cut.startswith("Galtrina longissima")
