"""A short plain-text inventory of a loaded study (what ``analog check`` prints)."""
from __future__ import annotations

__all__ = ["inventory"]


def inventory(study) -> str:
    """Study summary plus input files, records left out and warnings.

    Parameters
    ----------
    study : Study
        From :func:`analog.intake.load_study`.

    Returns
    -------
    str
        Several lines of text: :meth:`Study.summary`, the age span and stage
        coverage, one line per input file (rows and the first 12 hex digits of
        its sha256), one line per kind of record left out, and the warnings.
    """
    lines = [study.summary()]  # a region layer in another CRS than WGS84 is named in the warnings
    if study.files:
        lines.append("Input files:")
        for f in study.files:
            lines.append(f"  {f.role:<19} {f.path.name:<32} {f.rows:>9,} rows  sha256 {f.sha256[:12]}")
    if len(study.dropped):
        lines.append("Left out at intake:")
        for row in study.dropped.itertuples():
            lines.append(f"  {row.role}: {row.count:,} ({row.reason}; e.g. {row.examples})")
    if study.warnings:
        lines.append(f"Warnings ({len(study.warnings)}):")
        lines.extend(f"  - {w}" for w in study.warnings)
    return "\n".join(lines)
