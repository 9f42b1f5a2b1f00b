"""Helpers of the report tests (tests/io/test_report.py, tests/io/test_cycle_report.py): reading numbers back
from the reports' text, the rules every report obeys, and printing the HTML to PDF."""
import pathlib
import re

import pytest

#: The page break of the Markdown reports (an HTML div that print renderers honour).
PAGE_BREAK_MD = '<div style="break-before: page; page-break-before: always"></div>'

_SUP = str.maketrans("⁰¹²³⁴⁵⁶⁷⁸⁹⁻", "0123456789-")


def report_number(text: str) -> float:
    """A number as the reports write it: ``0.129``, ``−2.5``, ``3 × 10¹⁷``, ``1.14 × 10⁻⁵``."""
    t = text.strip().replace("−", "-")
    m = re.fullmatch(r"(-?[\d.]+) × 10([⁰¹²³⁴⁵⁶⁷⁸⁹⁻]+)", t)
    if m:
        return float(m.group(1)) * 10.0 ** int(m.group(2).translate(_SUP))
    return float(t)


def split_pm(text: str) -> tuple[float, float]:
    """``0.240 ± 0.030`` or ``(5.72 ± 0.37) × 10¹⁷`` -> (value, error)."""
    t = text.strip().replace("−", "-")
    m = re.fullmatch(r"\((\S+) ± (\S+)\) × 10([⁰¹²³⁴⁵⁶⁷⁸⁹⁻]+)", t)
    if m:
        scale = 10.0 ** int(m.group(3).translate(_SUP))
        return float(m.group(1)) * scale, float(m.group(2)) * scale
    value, error = t.split(" ± ")
    return float(value), float(error)


def md_rows(md: str, header_start: str) -> list[list[str]]:
    """The body rows of the Markdown table whose header starts with ``| header_start``."""
    lines = md.splitlines()
    i = next(k for k, ln in enumerate(lines) if ln.startswith(f"| {header_start}"))
    rows = []
    for ln in lines[i + 2:]:
        if not ln.startswith("|"):
            break
        rows.append([c.strip() for c in ln.strip().strip("|").split(" | ")])
    return rows


#: What a report never contains: Python reprs and number formats, "+-", repository paths as references,
#: unverified statements, a column density without its unit.
FORBIDDEN = [r"\+-", r"from memory", r"\d[eE][+-]?\d", r"docs/", r"\.py\b", r"synthcorona/", r"DEM\(",
             r"Quantity", r"array\(", r"AbundanceSet", r"np\.float", r"\bnan\b", r"\bNone\b", r"N_H 0\b",
             r"https?://", r"mappingproxy"]


def no_raw_text(report: str) -> None:
    """Assert that ``report`` (Markdown or HTML) holds none of :data:`FORBIDDEN` outside its style sheet and
    embedded images."""
    text = re.sub(r"<style>.*?</style>", "", report, flags=re.S)
    text = re.sub(r"data:image/png;base64,[A-Za-z0-9+/=]+", "", text)
    text = re.sub(r"\b[0-9a-f]{12,64}\b", "<hash>", text)   # content hashes are hex, not numbers
    for pattern in FORBIDDEN:
        m = re.search(pattern, text)
        assert m is None, f"{pattern!r} found: ...{text[max(m.start() - 80, 0):m.end() + 80]}..."


def pdf_pages(html: str, path: pathlib.Path) -> list[str]:
    """Print ``html`` to the PDF ``path`` with WeasyPrint and return the text of each page (pypdf).

    Skips the test when WeasyPrint or its system libraries (Pango; CI installs them in .ci/run) are missing.
    """
    try:
        import weasyprint
    except (ImportError, OSError) as exc:        # OSError: the package is there but libpango is not
        pytest.skip(f"printing the HTML report needs WeasyPrint and Pango (pip extra 'test', Debian packages "
                    f"libpango-1.0-0 libpangoft2-1.0-0): {type(exc).__name__}: {str(exc)[:120]}")
    from pypdf import PdfReader

    weasyprint.HTML(string=html).write_pdf(path)
    return [p.extract_text() for p in PdfReader(path).pages]
