# Diagnostics of reading the source (TC1xx): what the preprocessor and the
# parser could not read and what they skipped because of it (TC100..TC189),
# then the file's bytes and build flags (TC190..). Positions named in a
# message are Span arguments, rendered `line:column` when shown.

from __future__ import annotations

from tripcount.diagnostics.base import Diagnostic


class SyntaxProblem(Diagnostic):
    """A statement or declaration the grammar cannot read; it is skipped."""

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


class TrigraphIgnored(Diagnostic):
    """A trigraph (??< for '{' and the like), read as written: as in C23 and gcc without -trigraphs."""

    code = "TC122"
    severity = "error"  # the code around it is misread: the gate must not pass such a file silently
    title = "trigraph-ignored"
    template = ("trigraph '{spelling}' at {where} is read as written, not as '{meaning}' (as in C23 and gcc "
                "without -trigraphs); code written with trigraphs is not read as C99 would read it")


class InvalidEncoding(Diagnostic):
    """Bytes that are not UTF-8; they are replaced and the file is read anyway."""

    code = "TC190"
    severity = "warning"
    title = "invalid-encoding"
    template = "byte {byte} is not valid UTF-8; read as U+FFFD"


class BuildFlagsUnreadable(Diagnostic):
    """A compilation database that applies to the file cannot be read; the file is read without it."""

    code = "TC191"
    severity = "warning"
    title = "compile-commands-unreadable"
    template = "cannot use {reason}; this file is read without its build flags"


class LiveAnalysisSkipped(Diagnostic):
    """A document too large to analyze while it is being edited (language server); the command line
    analyzes it."""

    code = "TC192"
    severity = "note"
    title = "live-analysis-skipped"
    template = "document too large for live analysis ({kib} KiB); run `tripcount analyze` on it"
