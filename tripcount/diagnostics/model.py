# Diagnostics of the loop-nest model (TC2xx). Refusals are warnings: the file
# is fine, the tool only declines to count that part. Notes explain modelling
# choices. A loop named in a message is a LoopRef argument, a statement's
# position a Span, both rendered when the message is shown.

from __future__ import annotations

from tripcount.diagnostics.base import Diagnostic


class NonConstantStep(Diagnostic):
    """The loop variable does not advance by an integer constant."""

    code = "TC201"
    severity = "warning"
    title = "non-constant-step"
    template = "{loop}: the step '{step}' is not a constant increment of '{var}' ({detail}); the loop is not counted"


class ArrayDependentBound(Diagnostic):
    """A loop bound reads array contents (e.g. CSR row pointers)."""

    code = "TC202"
    severity = "warning"
    title = "array-dependent-bound"
    template = "{loop}: the {part} depends on array contents ('{text}'), so its iteration count is data-dependent and not counted"


class WrittenValueBound(Diagnostic):
    """A loop bound uses a variable that is assigned inside the nest."""

    code = "TC203"
    severity = "warning"
    title = "loop-varying-bound"
    template = "{loop}: the {part} depends on '{name}', which is assigned inside the loop nest; the loop is not counted"


class EarlyBreak(Diagnostic):
    """`break` leaves a loop after a data-dependent number of iterations."""

    code = "TC204"
    severity = "warning"
    title = "break-in-loop"
    template = "'break' at {pos} can leave {loop} early; that loop's iteration count is data-dependent and its statements are not counted"


class JumpInNest(Diagnostic):
    """`return` or `goto` inside a nest: nothing after it is certain."""

    code = "TC205"
    severity = "warning"
    title = "jump-in-nest"
    template = "'{kind}' at {pos} inside the nest of {loop}: no statement of this nest can be counted exactly"


class WhileInNest(Diagnostic):
    """A `while`/`do` loop inside a nest: its trip count is data-dependent."""

    code = "TC206"
    severity = "warning"
    title = "while-in-nest"
    template = "'{kind}' loop at {pos} in {loop}: its iteration count is data-dependent; the statements inside it are not counted"


class LoopVarModified(Diagnostic):
    """The body assigns the loop variable."""

    code = "TC207"
    severity = "warning"
    title = "loop-variable-modified"
    template = "{loop}: the loop variable '{var}' is modified in the body at {pos}; the loop is not counted"


class UnboundedLoop(Diagnostic):
    """The loop condition need not become false."""

    code = "TC208"
    severity = "warning"
    title = "unbounded-loop"
    template = "{loop}: {detail}; the loop may not terminate, so it is not counted"


class NonAffineBound(Diagnostic):
    """A loop bound is not an affine expression (e.g. `i*j`)."""

    code = "TC209"
    severity = "warning"
    title = "non-affine-bound"
    template = "{loop}: the {part} '{text}' is not affine ({detail}); the loop is not counted"


class NonAffineGuard(Diagnostic):
    """An `if` condition is not affine (e.g. `A[i] > 0`)."""

    code = "TC210"
    severity = "warning"
    title = "non-affine-guard"
    template = "the condition '{text}' at {pos} is not affine ({detail}); the statements under it are not counted"


class NonMonotoneCondition(Diagnostic):
    """The loop condition does not switch from true to false only once."""

    code = "TC211"
    severity = "warning"
    title = "non-monotone-condition"
    template = "{loop}: the condition '{text}' does not change monotonically as '{var}' advances; the loop is not counted"


class UnsupportedLoopForm(Diagnostic):
    """A `for` header outside the modelled forms (several variables, no step, ...)."""

    code = "TC212"
    severity = "warning"
    title = "unsupported-loop-form"
    template = "{loop}: {detail}; the loop is not counted"


class UnmodelledContinue(Diagnostic):
    """`continue` under a condition that is not modelled."""

    code = "TC213"
    severity = "warning"
    title = "unmodelled-continue"
    template = "'continue' at {pos} depends on a condition that is not modelled; the statements after it in {loop} are not counted"


class SwitchInNest(Diagnostic):
    """A `switch` inside a nest: which case runs is not modelled."""

    code = "TC214"
    severity = "warning"
    title = "switch-in-nest"
    template = "'switch' at {pos}: which case runs is not modelled; the statements inside it are not counted"


class UnreadStatement(Diagnostic):
    """The front end could not read a statement inside a nest."""

    code = "TC215"
    severity = "note"
    title = "unread-statement"
    template = "the statement at {pos} could not be read{reason}; it is counted as one statement without array accesses"


class SymbolicParameter(Diagnostic):
    """A loop-invariant value that is not affine becomes a size parameter."""

    code = "TC216"
    severity = "note"
    title = "symbolic-parameter"
    template = "'{text}' does not change inside the nest and is treated as a size parameter '{name}'"


class NonAffineSubscript(Diagnostic):
    """An array subscript that is not affine: the count is fine, the footprint misses it."""

    code = "TC217"
    severity = "note"
    title = "non-affine-subscript"
    template = "the subscript of '{text}' at {pos} is not affine ({detail}); this access is left out of the footprint"


class BadAssumption(Diagnostic):
    """An `--assume` text that cannot be read."""

    code = "TC218"
    severity = "error"
    title = "bad-assumption"
    template = "cannot read the assumption '{text}': {reason}"


class FloatingLoop(Diagnostic):
    """A loop over a floating-point variable."""

    code = "TC219"
    severity = "warning"
    title = "floating-loop"
    template = "{loop}: the loop variable '{var}' has the floating type '{type}'; only integer loops are counted"


class ExpressionTooDeep(Diagnostic):
    """An expression nested beyond what the analysis follows; its statement (and nest) is skipped."""

    code = "TC220"
    severity = "warning"
    title = "expression-too-deep"
    template = ("the expression at {pos} is nested more than {limit} levels deep (with its statements); "
                "the statement holding it is skipped{effect}")


class UnsignedComparison(Diagnostic):
    """A loop bound compared in unsigned arithmetic: where it is negative it wraps (E + 2^32 or E + 2^64),
    counted as C does."""

    code = "TC221"
    severity = "note"
    title = "unsigned-comparison"
    template = ("{loop}: '{bound}' is compared with '{var}' as {type}, so where it is negative it reads "
                "'{shifted}' (C's conversion); counted so")


class IntegerWrap(Diagnostic):
    """The loop variable can step past the range of its C type (it wraps or overflows) when the stated
    condition holds; counted assuming it does not."""

    code = "TC222"
    severity = "warning"
    title = "integer-wrap"
    template = "{loop}: {what} when {when}; counted assuming it does not (the counts are 0 there)"


class UncountedWhile(Diagnostic):
    """A `while`/`do` loop outside every nest whose iteration count is not known (it is not a counted
    loop in disguise); named with the reason."""

    code = "TC223"
    severity = "warning"
    title = "uncounted-while"
    template = ("'{kind}' loop at {pos} in {function}(): {reason}; it is not counted (statements directly in it are "
                "not counted; loop nests inside it are counted per iteration of it)")


class PerWhileIteration(Diagnostic):
    """A nest inside a `while`/`do` loop: its counts are per iteration of that loop."""

    code = "TC224"
    severity = "note"
    title = "per-while-iteration"
    template = ("this nest is counted per iteration of the '{kind}' loop at line {while_at:line}, whose number of "
                "iterations is not known")
