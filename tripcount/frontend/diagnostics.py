# Diagnostics of the front end (codes TC100..TC189): what the preprocessor and
# the parser could not read, and what they skipped because of it. Every
# message names the file-relative line:column it is about (`where`) and the
# reason, so that it reads well even without the `path:line:col:` prefix.

from __future__ import annotations

from tripcount.diagnostics import Diagnostic


class SyntaxProblem(Diagnostic):
    """A statement or declaration the grammar cannot read; it becomes ir.Unparsed."""

    code = "TC101"
    severity = "warning"
    title = "unreadable-statement"
    template = "cannot read this as C at {where}: {reason}; skipped"


class MacroRecursion(Diagnostic):
    """A macro that names itself in its expansion; as in C, the inner name stays unexpanded."""

    code = "TC103"
    severity = "note"
    title = "macro-recursion"
    template = ("macro '{name}' refers to itself at {where}; as in C, the inner "
                "'{name}' is left unexpanded")


class UnbalancedBraces(Diagnostic):
    """A '{' without its '}' (or the other way round)."""

    code = "TC104"
    severity = "error"
    title = "unbalanced-braces"
    template = "unbalanced braces at {where}: {reason}"


class UnterminatedComment(Diagnostic):
    """A block comment that runs to the end of the file."""

    code = "TC105"
    severity = "warning"
    title = "unterminated-comment"
    template = "the comment opened at {where} is never closed; the rest of the file is a comment"


class UnterminatedConditional(Diagnostic):
    """An #if/#ifdef/#ifndef without #endif."""

    code = "TC106"
    severity = "warning"
    title = "unterminated-conditional"
    template = "the #{directive} at {where} has no #endif; it is closed at the end of the file"


class StrayDirective(Diagnostic):
    """#else, #elif or #endif without an open #if."""

    code = "TC107"
    severity = "warning"
    title = "stray-directive"
    template = "#{directive} at {where} has no matching #if; ignored"


class ExpansionLimit(Diagnostic):
    """Macro expansion grew past the budget (or nested too deeply); the rest is left as written."""

    code = "TC108"
    severity = "warning"
    title = "macro-expansion-limit"
    template = "macro expansion stopped at {where}: {reason}; the remaining tokens are read unexpanded"


class BadDirective(Diagnostic):
    """A #define/#undef/#ifdef the preprocessor cannot read."""

    code = "TC109"
    severity = "warning"
    title = "bad-directive"
    template = "cannot read the #{directive} at {where}: {reason}; ignored"


class BadMacroCall(Diagnostic):
    """A function-like macro call with unterminated or mismatched arguments."""

    code = "TC110"
    severity = "warning"
    title = "bad-macro-call"
    template = "cannot expand the call of macro '{name}' at {where}: {reason}; left unexpanded"


class FunctionSkipped(Diagnostic):
    """A function definition whose header or body cannot be read at all."""

    code = "TC111"
    severity = "error"
    title = "function-skipped"
    template = "function '{name}' at {where} is skipped: {reason}"


class NestingTooDeep(Diagnostic):
    """Statements nested beyond what the front end follows; the inner part is skipped."""

    code = "TC112"
    severity = "warning"
    title = "nesting-too-deep"
    template = "statements nested too deeply at {where} (more than {limit} levels); skipped"


class ConditionNotEvaluated(Diagnostic):
    """An #if/#elif condition the preprocessor cannot evaluate; the first branch is taken."""

    code = "TC113"
    severity = "note"
    title = "condition-not-evaluated"
    template = "cannot evaluate the #{directive} condition at {where} ({reason}); taking this branch"


class ErrorDirective(Diagnostic):
    """An active #error or #warning directive (reported; reading goes on)."""

    code = "TC114"
    severity = "note"
    title = "error-directive"
    template = "#{directive} at {where}: {text}"


class OmpClauseProblem(Diagnostic):
    """An OpenMP clause tripcount uses (schedule, collapse, num_threads) that it cannot read."""

    code = "TC115"
    severity = "warning"
    title = "omp-clause"
    template = "cannot read the OpenMP clause '{clause}' at {where}: {reason}; ignored"


class StrayPragma(Diagnostic):
    """An OpenMP loop pragma that is not followed by a `for` loop."""

    code = "TC116"
    severity = "note"
    title = "stray-omp-pragma"
    template = "the '#pragma omp {directive}' at {where} is not followed by a for loop; ignored"


class FileTooLarge(Diagnostic):
    """A file too large to read whole: the later function bodies are not read."""

    code = "TC117"
    severity = "warning"
    title = "file-too-large"
    template = ("the file is too large to read whole: {count} function bodies from {where} on "
                "are not read (the limit is {limit} tokens of function bodies per file)")


class MacroUseTooLarge(Diagnostic):
    """One use of a macro would expand to more tokens than its budget; it is read as written."""

    code = "TC118"
    severity = "warning"
    title = "macro-use-too-large"
    template = ("the use of macro '{name}' at {where} would produce more than {limit} tokens; "
                "it is read as written, unexpanded")


class HeaderNotFound(Diagnostic):
    """A quoted #include that is in none of the searched directories."""

    code = "TC119"
    severity = "note"
    title = "header-not-found"
    template = ("header {header} at {where} is not in {searched}; its macros and types are "
                "unknown here (give its directory with -I)")


class HeaderProblems(Diagnostic):
    """A header read through #include had problems of its own."""

    code = "TC120"
    severity = "warning"
    title = "header-problems"
    template = ("header {header} included at {where}: {count} problem(s) while reading it, the first "
                "at {first}; analyze the header itself to see them all")


class IncludeLimit(Diagnostic):
    """An #include past the nesting depth or the number of headers read per file."""

    code = "TC121"
    severity = "warning"
    title = "include-limit"
    template = "header {header} at {where} is not read: {reason}"


class FrontEndError(Diagnostic):
    """An unexpected failure of the front end on one file; the other files are unaffected."""

    code = "TC199"
    severity = "error"
    title = "front-end-error"
    template = "internal error while reading this file ({what}); please report it"


def where(line: int, column: int) -> str:
    """The `line:column` text used inside messages."""
    return f"{line}:{column}"
