# Text forms of the engine's results, in tripcount's own notation.
#
# Expressions: plain arithmetic with + - * / ^, integers, names and floor(...),
# parseable by sympy once ^ is read as power. Polynomials are printed over a
# common denominator with cheap factoring (monomial content, then linear
# factors found by exact root tests), e.g. "N*(N + 1)/2".
# Conditions: C syntax over the parameters ("N >= 1 && M >= N",
# "N % 2 == 0"), correct under C's truncating % (see format_conditions).

from __future__ import annotations

from collections.abc import Callable
from fractions import Fraction
from math import gcd, lcm

from tripcount.engine.qpoly import Floor, Lin, QPoly, atom_key

# ---------------------------------------------------------------------------
# expressions


def _lin_text(terms, const) -> str:
    """An integer affine expression: '2*N + M - 1'."""
    parts: list[tuple[int, str]] = []
    for a, c in terms:
        parts.append((int(c), atom_text(a)))
    out = ""
    for c, t in parts:
        mag = abs(c)
        s = t if mag == 1 else f"{mag}*{t}"
        if not out:
            out = s if c > 0 else f"-{s}"
        else:
            out += f" + {s}" if c > 0 else f" - {s}"
    c = int(const)
    if c or not out:
        if not out:
            out = str(c)
        else:
            out += f" + {c}" if c > 0 else f" - {-c}"
    return out


def atom_text(a) -> str:
    if isinstance(a, str):
        return a
    num = _lin_text(a.terms, a.const)
    if len(a.terms) > 1 or a.const:
        num = f"({num})"
    return f"floor({num}/{a.den})"


def _mono_text(m) -> str:
    parts = []
    for a, e in m:
        t = atom_text(a)
        parts.append(t if e == 1 else f"{t}^{e}")
    return "*".join(parts)


def _mono_sort_key(m):
    return (-sum(e for _, e in m), tuple((atom_key(a), -e) for a, e in m))


def _print_order(p: QPoly) -> list:
    """Terms by decreasing degree; within a degree positive ones first (reads 2*N - M)."""
    return sorted(p.terms, key=lambda m: (-sum(e for _, e in m), p.terms[m] < 0, _mono_sort_key(m)))


def _int_poly_text(p: QPoly) -> str:
    """Sum of the terms of a polynomial with integer coefficients."""
    out = ""
    for m in _print_order(p):
        c = p.terms[m]
        mag = abs(c)
        body = _mono_text(m)
        if not body:
            s = str(mag)
        elif mag == 1:
            s = body
        else:
            s = f"{mag}*{body}"
        if not out:
            out = s if c > 0 else f"-{s}"
        else:
            out += f" + {s}" if c > 0 else f" - {s}"
    return out or "0"


def _content(p: QPoly) -> tuple[Fraction, QPoly]:
    """p = c * q with q having coprime integer coefficients and a positive first term."""
    den = 1
    for c in p.terms.values():
        den = lcm(den, c.denominator)
    g = 0
    for c in p.terms.values():
        g = gcd(g, int(c * den))
    first = min(p.terms, key=_mono_sort_key)
    sign = -1 if p.terms[first] < 0 else 1
    c = Fraction(sign * g, den)
    return c, p * (1 / c)


def format_expanded(p: QPoly) -> str:
    """Expanded text, common denominator pulled out: '(N^2 + N)/2'."""
    if p.is_zero():
        return "0"
    c, q = _content(p)
    return _with_factor(c, [], q)


def _with_factor(c: Fraction, factors: list[tuple[QPoly, int]], rest: QPoly) -> str:
    texts = []
    for f, e in factors:
        t = _int_poly_text(f)
        if len(f.terms) > 1:
            t = f"({t})"
        texts.append(t if e == 1 else f"{t}^{e}")
    only_rest = not texts
    if not (rest.is_const() and rest.const_value() == 1):
        t = _int_poly_text(rest)
        if len(rest.terms) > 1 and not (only_rest and c == 1):
            t = f"({t})"
        texts.append(t)
    body = "*".join(texts)
    num, den = abs(c.numerator), c.denominator
    if not body:
        s = str(num)
    elif num == 1:
        s = body
    else:
        s = f"{num}*{body}"
    if den != 1:
        s = f"{s}/{den}"
    return f"-{s}" if c < 0 else s


# Root tests are formal (atoms are independent symbols), so a polynomial that
# is nonzero at one point modulo a large prime is not zero; the probe values
# are fixed so that the printed form never depends on chance.
PRIME = (1 << 61) - 1


def probe_point(atoms: list) -> dict:
    """Fixed values, modulo the prime, for atoms treated as independent symbols."""
    return {a: (0x9E3779B97F4A7C15 * (k + 1) + 12345) % PRIME for k, a in enumerate(atoms)}


def frac_mod(c: Fraction) -> int:
    """A rational number modulo the prime."""
    v = c.numerator % PRIME
    return v if c.denominator == 1 else v * pow(c.denominator, -1, PRIME) % PRIME


def eval_mod(p: QPoly, point: dict) -> int:
    """p modulo the prime, its atoms at `point` (values modulo the prime)."""
    total = 0
    for m, c in p.terms.items():
        v = frac_mod(c)
        for a, e in m:
            v = v * pow(point[a], e, PRIME) % PRIME
        total += v
    return total % PRIME


def _roots_mod(coeffs: dict[int, int]) -> list[int] | None:
    """Roots modulo the prime of a polynomial of degree 1 or 2 (None: another degree,
    or a leading coefficient that vanishes at the probe point; then test each candidate)."""
    n = max(coeffs)
    lead = coeffs.get(n, 0)
    if lead == 0 or n > 2:
        return None
    c0, c1 = coeffs.get(0, 0), coeffs.get(1, 0)
    if n == 1:
        return [-c0 * pow(c1, -1, PRIME) % PRIME]
    disc = (c1 * c1 - 4 * lead * c0) % PRIME
    root = pow(disc, (PRIME + 1) // 4, PRIME)  # the prime is 3 mod 4
    if root * root % PRIME != disc:
        return []
    inv = pow(2 * lead, -1, PRIME)
    return list({(-c1 + root) * inv % PRIME, (-c1 - root) * inv % PRIME})


def _horner_mod(coeffs: dict[int, int], value: int) -> int:
    out = 0
    for k in range(max(coeffs), -1, -1):
        out = (out * value + coeffs.get(k, 0)) % PRIME
    return out


def _horner(coeffs: dict[int, QPoly], value: QPoly) -> QPoly:
    out = QPoly()
    for k in range(max(coeffs), -1, -1):
        out = out * value + coeffs.get(k, QPoly())
    return out


def _divide_linear(coeffs: dict[int, QPoly], root: QPoly) -> dict[int, QPoly]:
    """Quotient of sum c_k a^k by (a - root) (exact division assumed)."""
    n = max(coeffs)
    q: dict[int, QPoly] = {}
    carry = QPoly()
    for k in range(n, 0, -1):
        carry = coeffs.get(k, QPoly()) + carry * root if k != n else coeffs.get(k, QPoly())
        q[k - 1] = carry
    return q


def _rebuild(coeffs: dict[int, QPoly], a) -> QPoly:
    out = QPoly()
    av = QPoly.atom(a)
    for k, c in coeffs.items():
        out = out + c * av**k
    return out


def format_qpoly(p: QPoly) -> str:
    """Factored text where cheap: 'N*(N + 1)/2', 'floor(N/2)^2 + N'."""
    if p.is_zero():
        return "0"
    c, q = _content(p)
    factors: dict[QPoly, int] = {}
    # monomial content
    common = None
    for m in q.terms:
        d = dict(m)
        common = d if common is None else {a: min(e, d.get(a, 0)) for a, e in common.items()}
    common = {a: e for a, e in (common or {}).items() if e}
    if common and len(q.terms) > 1:
        for a, e in sorted(common.items(), key=lambda it: atom_key(it[0])):
            factors[QPoly.atom(a)] = e
            q = QPoly(
                {
                    tuple((b, f - (e if b == a else 0)) for b, f in m if f - (e if b == a else 0)): v
                    for m, v in q.terms.items()
                }
            )
    # linear factors (a - root), root an integer, a small fraction, or +-b + k
    for _ in range(8):
        if len(q.terms) <= 1 or q.degree() <= 1:
            break
        found = False
        atoms = sorted(q.atoms(), key=atom_key)
        point = probe_point(atoms)
        cands = [(b, mult, k, _root_mod(b, mult, k, point)) for b, mult, k in _root_candidates(None, atoms)]
        by_value: dict[int, list[int]] = {}
        for idx, cand in enumerate(cands):
            by_value.setdefault(cand[3], []).append(idx)
        for a in atoms:
            coeffs = q.coeffs_in_atom(a)
            if max(coeffs) < 1:
                continue
            mod_coeffs = {k: eval_mod(c, point) for k, c in coeffs.items()}
            # a nonzero value at one point proves 'not a root'; only the
            # survivors are built and pay for the exact symbolic test
            roots = _roots_mod(mod_coeffs)
            if roots is None:
                survivors = [i for i, cand in enumerate(cands) if _horner_mod(mod_coeffs, cand[3]) == 0]
            else:
                survivors = sorted(i for r in roots for i in by_value.get(r, ()))
            for b, mult, k, _value in (cands[i] for i in survivors):
                if b == a:
                    continue  # factoring is formal: atoms are independent symbols here
                root = QPoly.const(k) if b is None else QPoly.atom(b) * mult + k
                if _horner(coeffs, root).is_zero():
                    quo = _rebuild(_divide_linear(coeffs, root), a)
                    lin = QPoly.atom(a) - root
                    lc, lin = _content(lin)
                    qc, quo = _content(quo * lc)
                    c = c * qc
                    factors[lin] = factors.get(lin, 0) + 1
                    q = quo
                    found = True
                    break
            if found:
                break
        if not found:
            break
    if q.is_const():
        c = c * q.const_value()
        q = QPoly.const(1)
    elif q in factors:
        factors[q] += 1
        q = QPoly.const(1)
    if c < 0:
        # a negative overall sign reads better folded into a factor that is
        # mostly negative: -M*(M - 2*N - 1)/2 -> M*(2*N - M + 1)/2
        cands = [f for f, e in factors.items() if e % 2 == 1 and len(f.terms) > 1]
        if len(q.terms) > 1:
            cands.append(q)
        best = max(cands, key=_negativity, default=None)
        if best is not None and _negativity(best) >= 0:
            c = -c
            if best is q:
                q = -q
            else:
                factors[-best] = factors.pop(best)
    fl = sorted(factors.items(), key=lambda it: (len(it[0].terms), _int_poly_text(it[0])))
    return _with_factor(c, fl, q)


def _negativity(p: QPoly) -> int:
    """(number of negative) - (number of positive) non-constant coefficients."""
    return sum(-1 if v > 0 else 1 for m, v in p.terms.items() if m)


_CONST_ROOTS = [Fraction(k) for k in (0, -1, 1, -2, 2, -3, 3, -4, 4, -5, 5, -6, 6)] + [
    Fraction(s * n, d) for d in (2, 3) for n in (1, 2, 4, 5) for s in (1, -1) if n % d]
_ATOM_ROOTS = [(m, k) for k in (0, -1, 1, -2, 2) for m in (1, -1)] + [(m, k) for k in (0, -1, 1) for m in (2, -2)]


def _root_candidates(a, atoms) -> list[tuple]:
    """Roots tried for a linear factor (a - root), as (atom or None, multiplier, constant):
    integers, small fractions, +-b + k, and +-2*b + k (halos on both sides: (H + 2*B)*(W + 2*B))."""
    out: list[tuple] = [(None, 0, c) for c in _CONST_ROOTS]
    for b in atoms:
        if b != a:
            out += [(b, m, k) for m, k in _ATOM_ROOTS]
    return out


def _root_mod(b, mult: int, k: Fraction, point: dict) -> int:
    v = frac_mod(k)
    if b is not None:
        v = (v + mult * point[b]) % PRIME
    return v


# ---------------------------------------------------------------------------
# conditions in C syntax


def _cmp_text(lin: Lin, eq: bool) -> str:
    """'N >= M + 1' style text of lin >= 0 (or == 0), integer coefficients, no floors."""
    pos = [(a, c) for a, c in sorted(lin[0].items(), key=lambda it: atom_key(it[0])) if c > 0]
    neg = [(a, -c) for a, c in sorted(lin[0].items(), key=lambda it: atom_key(it[0])) if c < 0]
    const = lin[1]
    op = "==" if eq else ">="
    if not pos:
        # -(neg) + const >= 0  ->  neg <= const
        return f"{_lin_text(neg, 0)} {'==' if eq else '<='} {_lin_text([], const)}"
    if not neg:
        return f"{_lin_text(pos, 0)} {op} {_lin_text([], -const)}"
    rhs = _lin_text(neg, -const)
    return f"{_lin_text(pos, 0)} {op} {rhs}"


# Residue conditions are worked out by listing the residues (E % m == v): past
# this modulus they are printed as plain floor comparisons instead.
_MAX_RESIDUE_MODULUS = 4096


def _residue_pattern(lin: Lin):
    """If lin == s*(E mod m) + c0 for one top-level floor floor(E/m), return (E0, c, m, s, c0)."""
    fls = [a for a in lin[0] if isinstance(a, Floor)]
    if len(fls) != 1:
        return None
    f = fls[0]
    if any(isinstance(a, Floor) for a, _ in f.terms):
        return None
    b = lin[0][f]
    s = -b / f.den
    rest = {a: c for a, c in lin[0].items() if a != f}
    expect = {a: s * c for a, c in f.terms}
    if rest != expect:
        return None
    # lin = s*(E0 + c - m*floor(...)) + (const - s*c) with E0 = terms of f
    c0 = lin[1] - s * f.const
    return f, s, c0


def format_conditions(
    dnf: list[list[tuple[Lin, bool]]],
    nonneg: Callable[[Lin, int], bool],
) -> str:
    """C text of a disjunction of conjunctions of constraints.

    nonneg(E0, k) tells whether E0 >= 0 holds wherever it matters (k: index of
    the conjunction, or -1 for the whole context): C's % agrees with the
    mathematical residue only for a nonnegative dividend, but `(E - v) % m == 0`
    tests divisibility correctly for any sign.
    """
    conj_texts = []
    for k, conj in enumerate(dnf):
        parts: list[str] = []
        residues: dict[tuple, set[int]] = {}
        order: list[tuple] = []
        for lin, eq in conj:
            pat = _residue_pattern(lin)
            if pat is not None and pat[0].den <= _MAX_RESIDUE_MODULUS:
                f, s, c0 = pat
                m = f.den
                # allowed values v of R = E mod m: s*v + c0 (==|>=) 0
                ok = {v for v in range(m) if ((s * v + c0 == 0) if eq else (s * v + c0 >= 0))}
                # shift to E0 = E - const: R0 = E0 mod m, R = (R0 + const) mod m
                ok0 = {(v - f.const) % m for v in ok}
                key = (f.terms, m)
                if key not in residues:
                    residues[key] = set(range(m))
                    order.append(key)
                residues[key] &= ok0
                continue
            if any(isinstance(a, Floor) for a in lin[0]):
                parts.append(_floor_cmp_text(lin, eq, nonneg, k))
            else:
                parts.append(_cmp_text(lin, eq))
        for key in order:
            terms, m = key
            ok = residues[key]
            if len(ok) == m:
                continue
            e0 = _lin_text(terms, 0)
            base = f"({e0})" if len(terms) > 1 else e0
            e0lin = (dict(terms), Fraction(0))
            if not ok:
                parts.append("0")
            elif len(ok) == 1:
                (v,) = ok
                if v == 0:
                    parts.append(f"{base} % {m} == 0")
                elif nonneg(e0lin, k):
                    parts.append(f"{base} % {m} == {v}")
                else:
                    parts.append(f"({_lin_text(terms, -v)}) % {m} == 0")
            elif len(ok) == m - 1:
                (v,) = set(range(m)) - ok
                if v == 0:
                    parts.append(f"{base} % {m} != 0")
                elif nonneg(e0lin, -1):
                    parts.append(f"{base} % {m} != {v}")
                else:
                    parts.append(f"({_lin_text(terms, -v)}) % {m} != 0")
            else:
                vals = sorted(ok)
                if nonneg(e0lin, -1):
                    if vals == list(range(vals[0], vals[-1] + 1)):
                        sub = []
                        if vals[0] > 0:
                            sub.append(f"{base} % {m} >= {vals[0]}")
                        if vals[-1] < m - 1:
                            sub.append(f"{base} % {m} <= {vals[-1]}")
                        parts.extend(sub)
                    else:
                        parts.append("(" + " || ".join(f"{base} % {m} == {v}" for v in vals) + ")")
                else:
                    parts.append(
                        "("
                        + " || ".join(f"({_lin_text(terms, -v)}) % {m} == 0" for v in vals)
                        + ")"
                    )
        conj_texts.append(parts)
    if not conj_texts:
        return "false"
    if any(not p for p in conj_texts):
        return "true"
    if len(conj_texts) == 1:
        return " && ".join(conj_texts[0])
    return " || ".join(
        f"({' && '.join(p)})" if len(p) > 1 else p[0] for p in conj_texts
    )


def _floor_cmp_text(lin: Lin, eq: bool, nonneg, k: int) -> str:
    """A constraint with floors. E - m*floor(E/m) prints as C's E % m (made
    nonnegative when E may be negative); a lone floor as C division when its
    dividend is >= 0, else as floor(...)."""
    items: list[tuple[str, Fraction]] = []
    rest = dict(lin[0])
    const = lin[1]
    for f in sorted((a for a in lin[0] if isinstance(a, Floor)), key=atom_key):
        if f not in rest or any(isinstance(b, Floor) for b, _ in f.terms):
            continue
        s = -rest[f] / f.den
        if s.denominator != 1 or not all(rest.get(a, 0) == s * c for a, c in f.terms):
            continue
        # s*(E0 + c) - s*m*floor(...) = s*(E mod m) with E = E0 + c
        del rest[f]
        for a, _ in f.terms:
            del rest[a]
        const -= s * f.const
        e = _lin_text(f.terms, f.const)
        e = f"({e})" if len(f.terms) > 1 or f.const else e
        if nonneg((dict(f.terms), Fraction(f.const)), k):
            items.append((f"{e} % {f.den}", s))
        else:
            items.append((f"({e} % {f.den} + {f.den}) % {f.den}", s))
    for a, c in sorted(rest.items(), key=lambda it: atom_key(it[0])):
        items.append((_c_atom(a, nonneg), c))
    pos, neg = [], []
    for t, c in items:
        mag = abs(int(c))
        # C's * / % share one precedence level, left to right: a coefficient in
        # front of 'E % m' or 'E / m' needs parentheses ('7*((2*N + 1) % 5)').
        if mag != 1 and (" % " in t or " / " in t):
            t = f"({t})"
        txt = t if mag == 1 else f"{mag}*{t}"
        (pos if c > 0 else neg).append(txt)
    const = int(const)
    if not pos:
        pos, neg, const = neg, [], -const
        op = "==" if eq else "<="
    else:
        op = "==" if eq else ">="
    lhs = " + ".join(pos)
    rhs = " + ".join(neg)
    if const:
        if rhs:
            rhs += f" - {const}" if const > 0 else f" + {-const}"
        else:
            rhs = str(-const)
    if not rhs:
        rhs = "0"
    return f"{lhs} {op} {rhs}"


def _c_atom(a, nonneg) -> str:
    if isinstance(a, str):
        return a
    num = _lin_text(a.terms, a.const)
    if len(a.terms) > 1 or a.const:
        num = f"({num})"
    inner_ok = not any(isinstance(b, Floor) for b, _ in a.terms)
    if inner_ok and nonneg((dict(a.terms), Fraction(a.const)), -1):
        return f"{num} / {a.den}"
    return f"floor({num}/{a.den})"
