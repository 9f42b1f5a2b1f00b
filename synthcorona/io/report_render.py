"""Text of the reports: numbers with units in plain words, and one list of blocks rendered as Markdown or HTML.

A report (:mod:`synthcorona.io.report`, :mod:`synthcorona.io.cycle_report`) is built as a list of
``(kind, content)`` blocks; :func:`render` turns it into Markdown or into one self-contained HTML
file laid out for A4 paper: the first page, then an appendix that starts on a new page (CSS
``break-before: page``; Markdown carries the same page break as an HTML ``div``). On screen the
HTML shows the pages at print size.

Block kinds: ``h1``, ``h2``, ``h3``, ``p`` (``**bold**`` allowed), ``note`` (small print), ``table``
(``(head, rows)``), ``list`` (items), ``figure`` (``(file name, PNG bytes, caption, width in mm)``)
and ``appendix`` (no content: the page break before the appendix).

The number formatters give at most the requested significant digits, powers of ten as
``3.2 × 10¹⁷`` and uncertainties as ``0.24 ± 0.03`` or ``(5.7 ± 0.4) × 10¹⁷``: never a Python
repr, never ``+-`` or ``1e+17``.
"""
from __future__ import annotations

import base64
import html
import math
import re

import astropy.units as u
import numpy as np

from ..constants import HC_KEV_ANGSTROM

__all__ = ["number", "plus_minus", "power_of_ten", "distance_text", "energy_range_text", "wavelength_range_text",
           "temperature_text", "describe_dem", "probability_text", "tidy_numbers", "render", "PAGE_CSS"]

_SUPERSCRIPT = str.maketrans("0123456789-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻")


def power_of_ten(exponent: int) -> str:
    """``10`` with ``exponent`` as Unicode superscript digits, e.g. ``10⁻¹⁸``."""
    return "10" + str(int(exponent)).translate(_SUPERSCRIPT)


def _mantissa(value: float, digits: int) -> tuple[str, int]:
    """(mantissa text with at most ``digits`` significant digits, trailing zeros dropped; exponent)."""
    exp = int(math.floor(math.log10(abs(value))))
    m = round(value / 10.0 ** exp, digits - 1)
    if abs(m) >= 10.0:                     # 9.996 -> 10.0: carry into the exponent
        m, exp = m / 10.0, exp + 1
    text = f"{m:.{digits - 1}f}".rstrip("0").rstrip(".") if digits > 1 else f"{m:.0f}"
    return text, exp


def number(x, digits: int = 3, small: float = 1e-3, large: float = 1e5) -> str:
    """``x`` with at most ``digits`` significant digits: plain between ``small`` and ``large`` (``0.0123``,
    ``4520``), else ``m × 10ⁿ``; ``n/a`` for NaN or a missing value, ``∞`` for infinity."""
    try:
        v = float(x)
    except (TypeError, ValueError):
        return "n/a"
    if math.isnan(v):
        return "n/a"
    if math.isinf(v):
        return "∞" if v > 0 else "−∞"
    if v == 0:
        return "0"
    if small <= abs(v) < large:
        exp = int(math.floor(math.log10(abs(v))))
        decimals = digits - 1 - exp                  # negative: round to tens, hundreds, ...
        text = f"{round(v, decimals):.{max(decimals, 0)}f}"
        if "." in text:
            text = text.rstrip("0").rstrip(".")
        return text.replace("-", "−")
    m, exp = _mantissa(v, digits)
    return f"{m.replace('-', '−')} × {power_of_ten(exp)}"


def plus_minus(value, error, digits: int = 2) -> str:
    """``value ± error`` with the error to ``digits`` significant digits and the value to the same
    decimal place; a common power of ten outside [1e-3, 1e5]: ``(5.72 ± 0.37) × 10¹⁷``."""
    v, e = float(value), float(error)
    if not math.isfinite(v):
        return number(v)
    if not math.isfinite(e) or e <= 0:
        return number(v, 3)
    exp = int(math.floor(math.log10(abs(v)))) if v != 0 else int(math.floor(math.log10(e)))
    scale = 0 if -3 <= exp < 5 else exp
    vs, es = v / 10.0 ** scale, e / 10.0 ** scale
    decimals = max(digits - 1 - int(math.floor(math.log10(es))), 0)
    text = f"{vs:.{decimals}f} ± {es:.{decimals}f}".replace("-", "−")
    return text if scale == 0 else f"({text}) × {power_of_ten(scale)}"


def probability_text(p, error, lower=None, upper=None, n: int | None = None) -> str:
    """A Monte Carlo probability with its statistical error: ``0.24 ± 0.03``; at 0 or 1, where the binomial
    error vanishes, the 68 % Wilson (1927) bound instead (``1.000 (≥ 0.999)``) or, without it, the number
    of realisations (``0 of 1000``)."""
    pv = float(p)
    if not math.isfinite(pv):
        return "n/a"
    if 0.0 < pv < 1.0:
        return f"{pv:.3f} ± {float(error):.3f}"
    if pv >= 1.0:
        if upper is not None and lower is not None and math.isfinite(float(lower)):
            return f"1.000 (≥ {float(lower):.3f})"
        return f"1 ({n} of {n})" if n else "1.000"
    if upper is not None and math.isfinite(float(upper)):
        return f"0.000 (≤ {float(upper):.3f})"
    return f"0 (0 of {n})" if n else "0.000"


_E_NOTATION = re.compile(r"(?<![\w.])([-+]?\d+(?:\.(\d*))?)[eE]([-+]?\d+)(?![\w.])")


#: Units written with ASCII exponents by computations, and their report form.
_UNIT_TEXT = (("cm-3", "cm⁻³"), ("cm-2", "cm⁻²"), ("s-1", "s⁻¹"), ("cm2", "cm²"), ("cm3", "cm³"))


def tidy_numbers(text: str) -> str:
    """``text`` (e.g. a note written by a computation) with every number in e-notation written as
    ``m × 10ⁿ``, keeping its significant digits (at most 4), and the units ``cm-3``, ``cm-2``, ``s-1``,
    ``cm2``, ``cm3`` with superscript exponents: ``[1e+14, 1.24e+19] g`` becomes ``[1 × 10¹⁴, 1.24 × 10¹⁹] g``."""
    def one(m):
        digits = min(max(len((m.group(2) or "").rstrip("0")) + 1, 1), 4)
        return number(float(m.group(0)), digits, small=math.inf)

    out = _E_NOTATION.sub(one, str(text))
    for plain, pretty in _UNIT_TEXT:
        out = re.sub(rf"(?<=\s){re.escape(plain)}(?![\w-])", pretty, out)
    return out


def distance_text(distance_pc: float) -> str:
    """A distance in parsec as text: in AU below 0.001 pc (``1 AU`` for the Sun), else in pc."""
    d = float(distance_pc)
    if d < 1e-3:
        return f"{number((d * u.pc).to_value(u.AU), 3)} AU"
    return f"{number(d, 3)} pc"


def energy_range_text(lo_kev: float, hi_kev: float) -> str:
    """``0.1 to 2.4 keV``."""
    return f"{number(lo_kev, 3)} to {number(hi_kev, 3)} keV"


def wavelength_range_text(lo_kev: float, hi_kev: float) -> str:
    """The wavelengths of the energy band [lo, hi] keV: ``5.17 to 124 Å`` (short to long)."""
    return f"{number(HC_KEV_ANGSTROM / float(hi_kev), 3)} to {number(HC_KEV_ANGSTROM / float(lo_kev), 3)} Å"


def temperature_text(kelvin: float) -> str:
    """A temperature in MK: ``2.5 MK``."""
    return f"{number(float(kelvin) / 1e6, 3)} MK"


def _em_text(em) -> str:
    q = em if isinstance(em, u.Quantity) else float(em) * u.cm ** -3
    unit = "cm⁻³" if q.unit.is_equivalent(u.cm ** -3) else "cm⁻⁵"
    return f"{number(float(np.asarray(q.value)), 3)} {unit}"


def describe_dem(dem) -> str:
    """A DEM model in plain words, e.g. "Gaussian in log T peaking at 2 MK (log T = 6.30), 0.2 dex wide;
    total EM 1 × 10⁵¹ cm⁻³"."""
    from ..dem import GaussianDEM, IsothermalDEM, MultiComponentDEM, PowerLawDEM, TabulatedDEM

    if isinstance(dem, MultiComponentDEM):
        parts = [describe_dem(c) for c in dem.components]
        return f"{len(parts)} components: " + "; ".join(f"({k + 1}) {p}" for k, p in enumerate(parts))
    em = _em_text(dem.total_em)
    if isinstance(dem, IsothermalDEM):
        return f"isothermal at {temperature_text(float(dem.temperature.to_value(u.K)))}, EM {em}"
    if isinstance(dem, GaussianDEM):
        mu, sigma = float(dem.peak_logT), float(dem.width_logT)
        return (f"Gaussian in log T peaking at {temperature_text(10 ** mu)} (log T = {mu:.2f}), {number(sigma, 3)} "
                f"dex wide; total EM {em}")
    if isinstance(dem, PowerLawDEM):
        return (f"power law, dEM/dlog T ∝ T^{number(float(dem.slope), 3)} from "
                f"{temperature_text(float(dem.min_temperature.to_value(u.K)))} to "
                f"{temperature_text(float(dem.peak_temperature.to_value(u.K)))}; total EM {em}")
    if isinstance(dem, TabulatedDEM):
        t = dem.temperature.to_value(u.K)
        return (f"tabulated at {t.size} temperatures from {temperature_text(t[0])} to {temperature_text(t[-1])}; "
                f"total EM {em}")
    return f"{type(dem).__name__.replace('DEM', '').lower() or 'DEM'} model; total EM {em}"


# ----------------------------------------------------------------------------- rendering
#: Page layout of the HTML reports: A4 with 14 mm margins in print, the same sheet size on screen.
PAGE_CSS = """
@page { size: A4; margin: 13mm 14mm 13mm 14mm; }
html { background: #e8e8e8; }
body { font-family: "DejaVu Sans", "Helvetica", "Arial", sans-serif; font-size: 8.6pt; line-height: 1.28;
       color: #111; margin: 0; }
.sheet { background: #fff; width: 182mm; margin: 6mm auto; padding: 13mm 14mm; box-sizing: content-box; }
.appendix { break-before: page; page-break-before: always; }
h1 { font-size: 13pt; margin: 0 0 1.5mm 0; }
h2 { font-size: 10pt; margin: 3mm 0 1mm 0; border-bottom: 0.3pt solid #888; }
h3 { font-size: 9pt; margin: 2.5mm 0 0.8mm 0; }
p, ul { margin: 0.8mm 0 1.2mm 0; }
ul { padding-left: 5mm; }
li { margin: 0.3mm 0; }
table { border-collapse: collapse; margin: 1mm 0 1.5mm 0; max-width: 100%; }
table.wide { width: 100%; }
td, th { border: 0.4pt solid #999; padding: 0.5mm 1.2mm; text-align: left; vertical-align: top; font-size: 7.8pt; }
th { background: #eee; font-weight: bold; vertical-align: bottom; }
td:first-child { white-space: nowrap; }
td.num, th.num { text-align: right; }
td.num { white-space: nowrap; }
.note { font-size: 7.4pt; color: #333; }
figure { margin: 1.5mm 0 2.5mm 0; break-inside: avoid; page-break-inside: avoid; }
figure img { display: block; max-width: 100%; }
figcaption { font-size: 7.6pt; margin-top: 0.8mm; }
@media print {
  html { background: none; }
  .sheet { width: auto; margin: 0; padding: 0; }
}
"""

_PAGE_BREAK_MD = '<div style="break-before: page; page-break-before: always"></div>'


def _md_table(head, rows) -> str:
    esc = [[str(c).replace("|", "\\|") for c in r] for r in rows]
    out = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    out += ["| " + " | ".join(r) + " |" for r in esc]
    return "\n".join(out)


def _to_markdown(blocks) -> str:
    out = []
    for kind, c in blocks:
        if kind == "h1":
            out.append(f"# {c}")
        elif kind == "h2":
            out.append(f"## {c}")
        elif kind == "h3":
            out.append(f"### {c}")
        elif kind in ("p", "note"):
            out.append(c)
        elif kind == "table":
            out.append(_md_table(*c))
        elif kind == "list":
            out.append("\n".join(f"- {x}" for x in c))
        elif kind == "figure":
            path, _, caption, _ = c
            out.append(f"![{caption}]({path})\n\n*{caption}*")
        elif kind == "appendix":
            out.append(_PAGE_BREAK_MD)
    return "\n\n".join(out) + "\n"


def _inline(text: str) -> str:
    """Escape for HTML, turning **bold** into <strong>."""
    parts = html.escape(str(text)).split("**")
    return "".join(f"<strong>{p}</strong>" if i % 2 else p for i, p in enumerate(parts))


def _numeric(cell: str) -> bool:
    s = str(cell).strip()
    return bool(s) and (s[0].isdigit() or s[0] in "−(≥≤<>" or s == "n/a")


def _html_table(head, rows) -> str:
    cls = [j > 0 and bool(rows) and all(_numeric(r[j]) or not str(r[j]).strip() for r in rows)
           for j in range(len(head))]                                       # the first column names the row

    def cell(tag, text, j):
        attr = ' class="num"' if cls[j] else ""
        return f"<{tag}{attr}>{_inline(text)}</{tag}>"

    wide = ' class="wide"' if len(head) == 2 else ""          # item / value tables span the page
    out = [f"<table{wide}><tr>" + "".join(cell("th", h, j) for j, h in enumerate(head)) + "</tr>"]
    out += ["<tr>" + "".join(cell("td", x, j) for j, x in enumerate(r)) + "</tr>" for r in rows]
    return "\n".join(out) + "\n</table>"


def _to_html(blocks) -> str:
    title = next((c for k, c in blocks if k == "h1"), "Report")
    out = ["<!DOCTYPE html>", "<html lang=\"en\"><head><meta charset=\"utf-8\">",
           f"<title>{html.escape(title)}</title><style>{PAGE_CSS}</style></head><body>", "<div class=\"sheet\">"]
    for kind, c in blocks:
        if kind in ("h1", "h2", "h3"):
            out.append(f"<{kind}>{html.escape(c)}</{kind}>")
        elif kind == "p":
            out.append(f"<p>{_inline(c)}</p>")
        elif kind == "note":
            out.append(f"<p class=\"note\">{_inline(c)}</p>")
        elif kind == "table":
            out.append(_html_table(*c))
        elif kind == "list":
            out.append("<ul>" + "".join(f"<li>{_inline(x)}</li>" for x in c) + "</ul>")
        elif kind == "figure":
            _, png, caption, width_mm = c
            data = base64.b64encode(png).decode("ascii")
            out.append(f"<figure><img style=\"width:{float(width_mm):g}mm\" alt=\"{html.escape(caption)}\" "
                       f"src=\"data:image/png;base64,{data}\"><figcaption>{_inline(caption)}</figcaption></figure>")
        elif kind == "appendix":
            out.append("</div>\n<div class=\"sheet appendix\">")
    out.append("</div></body></html>")
    return "\n".join(out) + "\n"


def render(blocks, fmt: str) -> str:
    """The blocks as Markdown (``fmt="md"``) or self-contained A4 HTML (``"html"``)."""
    from ..errors import InputError

    if fmt not in ("md", "html"):
        raise InputError(f"fmt={fmt!r} must be 'md' or 'html'", argument="fmt")
    return _to_markdown(blocks) if fmt == "md" else _to_html(blocks)
