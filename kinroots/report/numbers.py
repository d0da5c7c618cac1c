"""How many digits a reported number deserves, and how it is written (plain, Markdown,
LaTeX).

The digits rule for roots (the only place where kinroots rounds its results): a root z
is accepted when the last Newton correction satisfies |Δz| ≤ rtol·|z| (the solver's
``root_rtol``), and its ``relative_error`` column holds that correction computed at the
reported value, |δz|/|z|, an estimate of its actual error that does not depend on how
the model scales D (tables without that column: the residual |D(z)|, meaningful for the
unscaled electrostatic D).  The relative uncertainty of z is taken as
``ε = max(rtol, relative_error)``; a quantity v computed
linearly from one component x of z (Re or Im part: f, γ, k in 1/m, wavelength, damping
length) then has the relative uncertainty ``ε·|z|/|x|`` and is written with
``floor(−log10(ε·|z|/|x|))`` significant digits, between 1 and 15.  So a growth rate
a thousand times smaller than ω_r loses three digits against ω_r.
"""

from __future__ import annotations

import math
import re
from typing import Any

__all__ = [
    "MAX_DIGITS",
    "as_latex",
    "digits_for",
    "format_significant",
    "latex_text",
    "relative_uncertainty",
    "user_number",
]

#: Most significant digits written (a double carries 15 to 17).
MAX_DIGITS = 15


def relative_uncertainty(rtol: float, residual: float | None) -> float:
    """ε = max(rtol, residual): relative uncertainty of a root (module docstring); the
    second argument is the root's relative_error where the table has it."""
    eps = float(rtol)
    if residual is not None and math.isfinite(residual):
        eps = max(eps, float(residual))
    return eps if eps > 0 else 1e-16


def digits_for(eps: float, whole: float, part: float) -> int:
    """Significant digits of a quantity proportional to ``part`` (a component of a root
    of modulus ``whole``) when the root is known to relative ``eps``."""
    if not (math.isfinite(part) and part != 0 and math.isfinite(whole)):
        return 1
    rel = eps * abs(whole) / abs(part)
    if rel >= 1:
        return 1
    return max(1, min(MAX_DIGITS, math.floor(-math.log10(rel))))


def format_significant(value: float, digits: int) -> str:
    """``value`` to ``digits`` significant digits, plain for 1e-4 ≤ |v| < 1e6, otherwise
    with an exponent (``1.234e-07``); trailing zeros kept (they are significant)."""
    if value is None or not math.isfinite(value):
        return "—"
    if value == 0:
        return "0"
    rounded = float(f"{value:.{digits - 1}e}")
    exp = math.floor(math.log10(abs(rounded)))  # 9.99 -> 10.0 moves the exponent
    if -4 <= exp < 6:
        decimals = max(0, digits - 1 - exp)
        return f"{rounded:.{decimals}f}"
    return f"{rounded:.{digits - 1}e}"


def user_number(value: Any) -> str:
    """An input value as a user would write it: 0.12, not 0.12000000000000001 (12
    significant digits, trailing zeros dropped)."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    if not math.isfinite(v):
        return "—"
    return f"{v:.12g}"


def as_latex(text: str) -> str:
    """A number written by :func:`format_significant` as LaTeX math:
    ``1.23e-07`` → ``$1.23\\times10^{-7}$``; other text escaped for LaTeX."""
    t = text.strip()
    try:
        float(t)
    except ValueError:
        return escape_latex(text)
    if "e" in t:
        mantissa, exp = t.split("e")
        return f"${mantissa}\\times10^{{{int(exp)}}}$"
    return f"${t}$"


_LATEX_SPECIAL = {
    "\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#",
    "_": r"\_", "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}",
}


def escape_latex(text: str) -> str:
    """Text shown literally in LaTeX (the ten special characters escaped)."""
    return "".join(_LATEX_SPECIAL.get(c, c) for c in str(text))


#: Symbols of kinroots' own labels, as LaTeX math (no package needed).
_LATEX_MATH = {
    "α": r"\alpha", "β": r"\beta", "γ": r"\gamma", "θ": r"\theta", "λ": r"\lambda",
    "ν": r"\nu", "π": r"\pi", "ρ": r"\rho", "ω": r"\omega", "Ω": r"\Omega",
    "∥": r"\parallel", "⊥": r"\perp", "·": r"\cdot", "−": "-", "°": r"^\circ",
    "\x00": "^{-3}", "|": "|",
}
_SUB = re.compile(r"(\S)_([A-Za-z0-9]+(?:\([A-Za-z0-9+\-]*\))?|\([A-Za-z0-9+\-]*\))")


def _math_char(c: str) -> str:
    return _LATEX_MATH[c] + (" " if _LATEX_MATH[c][-1].isalpha() else "")


def latex_text(text: str) -> str:
    """A label such as ``"γ/ω_p(Ar+) [1/s]"`` in LaTeX: kinroots' Greek symbols and
    subscripts in math mode (``$\\omega_{\\mathrm{p(Ar+)}}$``), everything else escaped.
    Characters outside that set are kept as they are (UTF-8 input)."""
    out: list[str] = []
    pos = 0
    text = str(text).replace("⁻³", "\x00")

    def plain(chunk: str) -> str:
        return "".join(f"${_math_char(c).strip()}$" if c in _LATEX_MATH else
                       _LATEX_SPECIAL.get(c, c) for c in chunk)

    for m in _SUB.finditer(text):
        out.append(plain(text[pos:m.start()]))
        base = m.group(1)
        base_tex = _math_char(base).strip() if base in _LATEX_MATH else \
            _LATEX_SPECIAL.get(base, base)
        out.append(f"${base_tex}_{{\\mathrm{{{m.group(2)}}}}}$")
        pos = m.end()
    out.append(plain(text[pos:]))
    return "".join(out).replace("$$", "")
