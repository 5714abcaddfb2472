# Internal errors (TC9xx): an unexpected failure, contained to one nest, one
# file or one language-server document and reported so (robustness tests fail
# on any of these codes); and files that cannot be read at all.

from __future__ import annotations

from tripcount.diagnostics.base import Diagnostic


class InternalError(Diagnostic):
    """An unexpected failure inside one nest's analysis; the rest of the report goes on."""

    code = "TC900"
    severity = "error"
    title = "internal-error"
    template = "internal error while analyzing this nest ({what}); please report it. The other nests are unaffected"


class UnreadableFile(Diagnostic):
    """A file that cannot be read at all."""

    code = "TC901"
    severity = "error"
    title = "unreadable-file"
    template = "cannot read file: {reason}"


class ReadFailure(Diagnostic):
    """An unexpected failure while reading or modelling a whole file."""

    code = "TC902"
    severity = "error"
    title = "internal-error-file"
    template = "internal error while reading this file ({what}); please report it. The other files are unaffected"


class DocumentFailed(Diagnostic):
    """The language server could not analyze a document at all (a configuration or internal error);
    it goes on serving the other documents."""

    code = "TC904"
    severity = "error"
    title = "document-failed"
    template = "tripcount could not analyze this file: {what}"


class FrontEndError(Diagnostic):
    """An unexpected failure of the front end on one file; the other files are unaffected."""

    code = "TC903"
    severity = "error"
    title = "front-end-error"
    template = "internal error while reading this file ({what}); please report it"
