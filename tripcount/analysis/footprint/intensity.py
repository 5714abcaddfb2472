# Footprint: arithmetic intensity -- flops per byte of compulsory traffic,
# at the --at sizes and as the ratio of the leading terms for large sizes,
# with a roofline estimate when peak and bandwidth are configured.

from __future__ import annotations

import math
from fractions import Fraction
from typing import Any

from tripcount import engine
from tripcount.analysis import flops as flops_mod
from tripcount.analysis.footprint.results import Footprint, Intensity
from tripcount.model import Nest
from tripcount.options import Options


def asymptotic_ratio(num: Any, den: Any) -> str | None:
    """Ratio of the leading terms of two formulas as text ('N/12', '1/4', 'K*M*N/(4*(K*M + K*N + M*N))').

    The common numeric content and the common monomial factor are cancelled;
    None when either leading term is zero. (No sympy: it is slow to import.)
    """
    try:
        n = num.pieces[0].poly.leading_poly()
        d = den.pieces[0].poly.leading_poly()
    except (AttributeError, IndexError):
        return None
    if n.is_zero() or d.is_zero():
        return None

    def exps(m: tuple) -> dict[str, int]:
        return {a: e for a, e in m if isinstance(a, str)}

    def content(t: dict) -> Fraction:
        vals = [Fraction(v) for v in t.values()]
        g = 0
        lcd = 1
        for v in vals:
            g = math.gcd(g, v.numerator)
            lcd = lcd * v.denominator // math.gcd(lcd, v.denominator)
        c = Fraction(g, lcd)
        return -c if vals[0] < 0 else c

    nt = {tuple(sorted(exps(m).items())): v for m, v in n.terms.items()}
    dt = {tuple(sorted(exps(m).items())): v for m, v in d.terms.items()}
    cn, cd = content(nt), content(dt)
    coef = cn / cd
    names = {a for m in list(nt) + list(dt) for a, _ in m}
    common = {a: min(dict(m).get(a, 0) for m in list(nt) + list(dt)) for a in names}

    def strip(t: dict, c: Fraction) -> dict:
        out = {}
        for m, v in t.items():
            e = {a: k - common.get(a, 0) for a, k in m}
            out[tuple((a, k) for a, k in sorted(e.items()) if k)] = Fraction(v) / c
        return out

    nt, dt = strip(nt, cn), strip(dt, cd)
    num_q = engine.QPoly({m: v * coef.numerator for m, v in nt.items()})
    den_factors: list[str] = []
    if coef.denominator != 1:
        den_factors.append(str(coef.denominator))
    if len(dt) > 1 or (dt and next(iter(dt)) != ()):
        den_text = engine.QPoly(dt).to_expr()
        den_factors.append(f"({den_text})" if len(dt) > 1 else den_text)
    num_text = num_q.to_expr()
    if not den_factors:
        return num_text
    if " " in num_text:
        num_text = f"({num_text})"
    den_text = "*".join(den_factors)
    atomic = len(den_factors) == 1 and (den_text.startswith("(") or not any(ch in den_text for ch in "*+- "))
    return f"{num_text}/{den_text}" if atomic else f"{num_text}/({den_text})"


def intensity(nest_flops: flops_mod.Flops, footprint: Footprint, nest: Nest, options: Options) -> Intensity:
    """Flops per compulsory byte: at the --at sizes, asymptotically, and a roofline estimate if configured."""
    fc = nest_flops.count
    bc = footprint.bytes
    value = None
    if fc.value is not None and bc.value:
        value = Fraction(fc.value) / Fraction(bc.value)
    asym = None
    if fc.formula is not None and bc.formula is not None and not fc.formula.is_zero() and not bc.formula.is_zero():
        asym = asymptotic_ratio(fc.formula, bc.formula)
    roof = None
    if options.peak_gflops and options.bandwidth_gbs and value is not None:
        mem = float(value) * float(options.bandwidth_gbs)
        attain = min(float(options.peak_gflops), mem)
        roof = {"attainable_gflops": round(attain, 3), "peak_gflops": options.peak_gflops,
                "bandwidth_gbs": options.bandwidth_gbs,
                "bound_by": "memory bandwidth" if mem < float(options.peak_gflops) else "compute",
                "note": "model estimate: attainable = min(peak, intensity * bandwidth), compulsory traffic only"}
    note = None
    if bc.value is None and bc.note:
        note = bc.note
    if footprint.lower_bound:
        note = "upper bound: the footprint it divides by leaves references out (a lower bound)"
    return Intensity(value, asym, roof, note, upper_bound=footprint.lower_bound)


