# Front end: error recovery. When a body does not parse, it is cut into
# statements and each is parsed alone; a compound statement whose inside is
# broken is rebuilt from its header and its recovered parts, so a bad
# statement costs only itself. Iterative or depth-limited throughout.

from __future__ import annotations

from dataclasses import replace

from lark import Token

from tripcount import ir
from tripcount.diagnostics import source as d
from tripcount.frontend.build import cover
from tripcount.frontend.lalr import ParseFailure
from tripcount.frontend.scanner import match_brackets
from tripcount.frontend.vocab import MAX_RECOVERY_DEPTH


class Recovery:
    """Recovery of unreadable bodies (a part of UnitParser: uses its terminals and _parse)."""

    def _openers(self) -> dict[str, str]:
        return {self.LPAR: self.RPAR, self.LSQB: self.RSQB, self.LBRACE: self.RBRACE}

    def _closers(self) -> set[str]:
        return {self.RPAR, self.RSQB, self.RBRACE}

    def parse_body(self, lt: list[Token]) -> ir.Block:
        """A `{ ... }` token list as a Block; unreadable statements become ir.Unparsed."""
        try:
            return self._parse(lt, "body_start")
        except ParseFailure as exc:
            failure = exc
        self._match = match_brackets(lt, self._openers(), self._closers())
        self._index = {id(t): k for k, t in enumerate(lt)}
        at = self._index.get(id(failure.token)) if failure.token is not None else None
        known = (at, failure.reason) if at is not None else None
        return self._recover_block(lt, 0, len(lt) - 1, 0, known)

    def _recover_block(self, L: list[Token], lo: int, hi: int, depth: int,
                       known: tuple[int, str] | None = None) -> ir.Block:
        items: list[ir.Stmt] = []
        i = lo + 1
        while i < hi:
            e = self._stmt_end(L, i, hi)
            items.append(self._recover_stmt(L, i, e, depth, known))
            i = e
        return ir.Block(cover(L[lo], L[hi]), tuple(items))

    def _unparsed(self, L: list[Token], i: int, e: int, reason: str) -> ir.Unparsed:
        span = cover(L[i], L[e - 1])
        self.diags.append(d.SyntaxProblem(span, where=ir.Span.point(span.line, span.column),
                                          reason=reason))
        return ir.Unparsed(span, self.smap.slice(span), reason)

    def _semi_after(self, tok: Token) -> Token:
        return Token(self.SEMI, ";", tok.end_pos, tok.end_line, tok.end_column, tok.end_line,
                     tok.end_column, tok.end_pos)

    def _recover_stmt(self, L: list[Token], i: int, e: int, depth: int,
                      known: tuple[int, str] | None = None) -> ir.Stmt:
        # `known` is the failure of an enclosing statement: when it lies in
        # this range, parsing the range alone fails the same way, so the
        # attempt is skipped (keeps recovery linear in deeply nested code)
        if known is not None and i <= known[0] < e:
            reason = known[1]
        else:
            try:
                return self._parse(L[i:e], "item_start")
            except ParseFailure as exc:
                reason = exc.reason
                at = self._index.get(id(exc.token)) if exc.token is not None else None
                known = (at, reason) if at is not None else None
        if depth >= MAX_RECOVERY_DEPTH:
            span = cover(L[i], L[e - 1])
            self.diags.append(d.NestingTooDeep(span, where=ir.Span.point(span.line, span.column),
                                               limit=MAX_RECOVERY_DEPTH))
            return ir.Unparsed(span, self.smap.slice(span), "nested too deeply")
        m = self._match
        ty = L[i].type
        try:
            if ty == self.LBRACE and m[i] == e - 1:
                return self._recover_block(L, i, e - 1, depth + 1, known)
            if ty == "PRAGMA" and i + 1 < e:
                inner = self._recover_stmt(L, i + 1, e, depth + 1, known)
                return self.eng.builder.attach_pragma(L[i], inner)
            if ty in (self.FOR, self.WHILE, self.SWITCH) and i + 1 < e and L[i + 1].type == self.LPAR:
                k = m[i + 1]
                if i + 1 < k < e - 1:
                    node = self._parse(L[i:k + 1] + [self._semi_after(L[k])], "item_start")
                    body = self._recover_stmt(L, k + 1, e, depth + 1, known)
                    return replace(node, body=body, span=cover(node, body))
            if ty == self.IF and i + 1 < e and L[i + 1].type == self.LPAR:
                k = m[i + 1]
                if i + 1 < k < e - 1:
                    node = self._parse(L[i:k + 1] + [self._semi_after(L[k])], "item_start")
                    te = self._stmt_end(L, k + 1, e)  # stops before this if's own else
                    then = self._recover_stmt(L, k + 1, te, depth + 1, known)
                    other = None
                    if te + 1 < e and L[te].type == self.ELSE:
                        other = self._recover_stmt(L, te + 1, e, depth + 1, known)
                    last = other if other is not None else then
                    return replace(node, then=then, other=other, span=cover(node, last))
            if ty == self.DO and i + 1 < e:
                be = self._stmt_end(L, i + 1, e)
                if be < e and L[be].type == self.WHILE:
                    node = self._parse([L[i], self._semi_after(L[i])] + L[be:e], "item_start")
                    body = self._recover_stmt(L, i + 1, be, depth + 1, known)
                    return replace(node, body=body)
            if ty == "IDENT" and i + 2 < e and L[i + 1].type == self.COLON:
                inner = self._recover_stmt(L, i + 2, e, depth + 1, known)
                return ir.Labeled(cover(L[i], inner), str(L[i]), inner)
            if ty == self.DEFAULT and i + 2 < e and L[i + 1].type == self.COLON:
                inner = self._recover_stmt(L, i + 2, e, depth + 1, known)
                return ir.Labeled(cover(L[i], inner), "default", inner)
            if ty == self.CASE:
                c = self._case_colon(L, i, e)
                if c is not None and c + 1 < e:
                    inner = self._recover_stmt(L, c + 1, e, depth + 1, known)
                    return ir.Labeled(cover(L[i], inner), "case", inner)
        except ParseFailure as exc:
            reason = exc.reason
        return self._unparsed(L, i, e, reason)

    def _case_colon(self, L: list[Token], i: int, e: int) -> int | None:
        q = 0
        j = i + 1
        while j < e:
            ty = L[j].type
            if ty == self.QMARK:
                q += 1
            elif ty == self.COLON:
                if q == 0:
                    return j
                q -= 1
            elif ty in (self.LPAR, self.LSQB) and self._match[j] > j:
                j = self._match[j]
            j += 1
        return None

    def _stmt_end(self, L: list[Token], i: int, hi: int) -> int:
        """Index just past the statement starting at `i` (bounded by `hi`)."""
        m = self._match
        pending: list[str] = []
        while True:
            # prefixes: pragma, labels, loop/if/switch headers, `do`
            while True:
                if i >= hi:
                    return hi
                ty = L[i].type
                if ty == "PRAGMA":
                    i += 1
                elif ty in (self.FOR, self.WHILE, self.SWITCH, self.IF) and i + 1 < hi \
                        and L[i + 1].type == self.LPAR and i + 1 < m[i + 1] < hi:
                    if ty == self.IF:
                        pending.append("if")
                    i = m[i + 1] + 1
                elif ty in (self.FOR, self.WHILE, self.SWITCH, self.IF) and i + 1 < hi \
                        and L[i + 1].type == self.LPAR:
                    # the header's ')' is missing: the statement runs to its body's end
                    return self._broken_header_end(L, i, hi)
                elif ty == self.DO:
                    pending.append("do")
                    i += 1
                elif ty == "IDENT" and i + 1 < hi and L[i + 1].type == self.COLON:
                    i += 2
                elif ty == self.DEFAULT and i + 1 < hi and L[i + 1].type == self.COLON:
                    i += 2
                elif ty == self.CASE:
                    c = self._case_colon(L, i, hi)
                    if c is None:
                        break
                    i = c + 1
                else:
                    break
            # the statement itself
            if L[i].type == self.LBRACE and i < m[i] < hi:
                i = m[i] + 1
            else:
                i = self._simple_end(L, i, hi)
            # finish the constructs waiting for it
            reopened = False
            while pending:
                top = pending.pop()
                if top == "if":
                    if i < hi and L[i].type == self.ELSE:
                        i += 1
                        reopened = True
                        break
                else:
                    if i + 1 < hi and L[i].type == self.WHILE and L[i + 1].type == self.LPAR:
                        k = m[i + 1]
                        i = k + 1 if i + 1 < k < hi else hi
                        if i < hi and L[i].type == self.SEMI:
                            i += 1
            if not reopened:
                return i

    def _broken_header_end(self, L: list[Token], i: int, hi: int) -> int:
        m = self._match
        semis = 2 if L[i].type == self.FOR else 0
        j = i + 2
        while j < hi:
            ty = L[j].type
            if ty == self.SEMI:
                if semis == 0:
                    return j + 1
                semis -= 1
            elif ty == self.LBRACE and j < m[j] < hi:
                return m[j] + 1
            elif ty == self.RBRACE:
                return max(j, i + 1)
            elif ty in (self.LPAR, self.LSQB) and j < m[j] < hi:
                j = m[j]
            j += 1
        return hi

    def _simple_end(self, L: list[Token], i: int, hi: int) -> int:
        m = self._match
        j = i
        while j < hi:
            ty = L[j].type
            if ty == self.SEMI:
                return j + 1
            if ty == self.RBRACE:
                return j if j > i else j + 1  # a missing ';' before '}'
            if ty in (self.LPAR, self.LSQB, self.LBRACE) and j < m[j] < hi:
                j = m[j] + 1
                continue
            if ty == "PRAGMA" and j > i:
                return j
            j += 1
        return hi
