#!/usr/bin/python3
# scripts/layers.py: fails when modules use each other in a cycle or reach above their layer.
#
# Usage: /usr/bin/python3 scripts/layers.py [-v] [--root DIR] [--table FILE] OBJDIR
#
# Two graphs over modules (src/X.c with its private src/X.h; module = file stem):
#   symbols   A -> B when BUILD/obj/A.o leaves undefined a tb_ symbol that B.o defines (nm);
#             every strongly connected component of more than one module is a cycle.
#   includes  A -> B when a file of A includes B's header (#include "..." or <...>, resolved
#             as the compiler does with -Iinclude -Isrc).
# scripts/layers.txt places every module in a layer; an edge to a module out of reach of the
# user's layer is a layer violation unless the table allows it by name. include/*.h may
# include no src/ header. Exit status: 0 clean, 1 a check failed, 2 bad table or arguments.
# Standard library only; nm comes from binutils (NM in the environment overrides it).

import argparse
import os
import re
import subprocess
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
SEARCH_DIRS = ("include", "src")  # the Makefile's -I order


class InputError(Exception):
    """The check cannot run: a bad table, a missing build, no nm (exit status 2)."""


class Table:
    """The layer table: layers bottom to top, each module's layer, the allowed exceptions."""

    def __init__(self, path):
        self.path = path
        self.layers = []  # names, bottom to top
        self.floor = []  # per layer: the highest lower layer it reaches (and all below that)
        self.layer_of = {}  # module -> layer index
        self.allow = {}  # (A, B) -> (reason, line number)
        self.parse()

    def fail(self, lineno, message):
        raise InputError("%s:%d: %s" % (self.path, lineno, message))

    def parse(self):
        sees = []  # (layer index, name of the layer it sees, line number)
        last = None
        with open(self.path, encoding="utf-8") as f:
            lines = f.read().split("\n")
        for lineno, raw in enumerate(lines, 1):
            text, _, comment = raw.partition("#")
            if not text.strip():
                continue
            if raw[0] in " \t":
                if last is None:
                    self.fail(lineno, "a continuation line needs a 'layer' line above it")
                self.add_modules(last, text.split(), lineno)
                continue
            words = text.split()
            if words[0] == "layer":
                last = self.add_layer(text, lineno, sees)
            elif words[0] == "allow":
                last = None
                self.add_allow(words, comment.strip(), lineno)
            else:
                self.fail(lineno, "expected 'layer NAME: MODULE...' or 'allow A B  # why'")
        if not self.layers:
            self.fail(len(lines), "no layers")
        self.resolve_sees(sees)
        for (a, b), (_, lineno) in self.allow.items():
            for m in (a, b):
                if m not in self.layer_of:
                    self.fail(lineno, "allow names module '%s', which no layer lists" % m)

    def add_layer(self, text, lineno, sees):
        m = re.match(r"\s*layer\s+(\w+)(?:\s+sees\s+(\w+))?\s*:(.*)$", text)
        if not m:
            self.fail(lineno, "expected 'layer NAME: MODULE...' or 'layer NAME sees LOWER: MODULE...'")
        name, seen, rest = m.groups()
        if name in self.layers:
            self.fail(lineno, "layer '%s' is listed twice" % name)
        self.layers.append(name)
        index = len(self.layers) - 1
        self.floor.append(index - 1)
        if seen:
            sees.append((index, seen, lineno))
        self.add_modules(index, rest.split(), lineno)
        return index

    def add_modules(self, index, modules, lineno):
        for module in modules:
            if not re.fullmatch(r"\w+", module):
                self.fail(lineno, "'%s' is not a module name" % module)
            if module in self.layer_of:
                self.fail(lineno, "module '%s' is already in layer '%s'"
                          % (module, self.layers[self.layer_of[module]]))
            self.layer_of[module] = index

    def add_allow(self, words, reason, lineno):
        if len(words) != 3:
            self.fail(lineno, "expected 'allow A B  # why'")
        if not reason:
            self.fail(lineno, "allow %s %s: say why in a comment on the same line" % (words[1], words[2]))
        self.allow[(words[1], words[2])] = (reason, lineno)

    def resolve_sees(self, sees):
        for index, seen, lineno in sees:
            if seen not in self.layers[:index]:
                self.fail(lineno, "layer '%s' sees '%s', which is not a layer below it"
                          % (self.layers[index], seen))
            self.floor[index] = self.layers.index(seen)

    def reaches(self, a, b):
        """May module a use module b by the layers alone?"""
        la, lb = self.layer_of[a], self.layer_of[b]
        return lb == la or lb <= self.floor[la]

    def why_not(self, a, b):
        """Why module a may not use module b, in a few words."""
        la, lb = self.layer_of[a], self.layer_of[b]
        if lb > la:
            return "%s is below %s" % (self.layers[la], self.layers[lb])
        return "%s sees %s and below, not %s" % (self.layers[la], self.layers[self.floor[la]],
                                                self.layers[lb])


# ---- sources and includes ------------------------------------------------------------------

def strip_comments(text):
    """The text with comments blanked (newlines kept), string and char literals left alone."""
    out = []
    i = 0
    n = len(text)
    while i < n:
        c = text[i]
        if text.startswith("/*", i):
            end = text.find("*/", i + 2)
            end = n if end < 0 else end + 2
            out.append(re.sub(r"[^\n]", " ", text[i:end]))
            i = end
        elif text.startswith("//", i):
            end = text.find("\n", i)
            end = n if end < 0 else end
            i = end
        elif c in "\"'":
            j = i + 1
            while j < n and text[j] != c and text[j] != "\n":
                j += 2 if text[j] == "\\" else 1
            out.append(text[i:j + 1])
            i = j + 1
        else:
            out.append(c)
            i += 1
    return "".join(out)


INCLUDE = re.compile(r'^[ \t]*#[ \t]*include[ \t]*([<"])([^>"\n]+)[>"]', re.M)


def includes(root, rel):
    """(line, name, resolved path relative to root or None) for each include of file rel."""
    with open(os.path.join(root, rel), encoding="utf-8", errors="replace") as f:
        text = strip_comments(f.read())
    found = []
    for m in INCLUDE.finditer(text):
        lineno = text.count("\n", 0, m.start()) + 1
        dirs = ([os.path.dirname(rel)] if m.group(1) == '"' else []) + list(SEARCH_DIRS)
        resolved = None
        for d in dirs:
            candidate = os.path.normpath(os.path.join(d, m.group(2)))
            if os.path.isfile(os.path.join(root, candidate)):
                resolved = candidate
                break
        found.append((lineno, m.group(2), resolved))
    return found


def src_module(rel):
    """The module a path under src/ belongs to, or None for any other path."""
    head, name = os.path.split(rel)
    stem, ext = os.path.splitext(name)
    if head == "src" and ext in (".c", ".h"):
        return stem
    return None


def list_dir(root, sub, exts):
    d = os.path.join(root, sub)
    if not os.path.isdir(d):
        return []
    return sorted(os.path.join(sub, n) for n in os.listdir(d)
                  if os.path.splitext(n)[1] in exts and os.path.isfile(os.path.join(d, n)))


# ---- symbols -------------------------------------------------------------------------------

def read_symbols(root, obj):
    """(defined, used): tb_ symbol -> 'file:line' (or '') for one object file, from nm."""
    nm = os.environ.get("NM", "nm")
    try:
        run = subprocess.run([nm, "-P", "-l", obj], capture_output=True, text=True)
    except OSError as e:
        raise InputError("cannot run %s: %s" % (nm, e))
    if run.returncode != 0:
        raise InputError("%s %s: %s" % (nm, obj, run.stderr.strip()))
    defined = {}
    used = {}
    for line in run.stdout.splitlines():
        fields, _, loc = line.partition("\t")
        parts = fields.split()
        if len(parts) < 2 or not parts[0].startswith("tb_"):
            continue
        sym, kind = parts[0], parts[1]
        loc = loc.strip()
        for prefix in {root, os.path.realpath(root)}:
            if loc.startswith(prefix + os.sep):
                loc = loc[len(prefix) + 1:]
                break
        if kind in ("U", "w", "v"):
            used[sym] = loc
        elif kind.isupper():
            defined[sym] = loc
    return defined, used


def symbol_edges(root, objdir, modules):
    """Edges A -> B: sorted [(symbol, where A uses it)] for each pair, and notes."""
    notes = []
    defined_by = {}
    uses = {}
    for module in sorted(modules):
        obj = os.path.join(objdir, module + ".o")
        if not os.path.isfile(obj):
            raise InputError("%s: missing (src/%s.c has no object; build first)" % (obj, module))
        defined, used = read_symbols(root, obj)
        for sym in defined:
            defined_by.setdefault(sym, module)
        uses[module] = used
    for name in sorted(os.listdir(objdir)):
        stem, ext = os.path.splitext(name)
        if ext == ".o" and stem not in modules:
            notes.append("%s: ignored (no src/%s.c; left from an older build)"
                         % (os.path.join(objdir, name), stem))
    edges = {}
    for a, used in uses.items():
        for sym, loc in used.items():
            b = defined_by.get(sym)
            if b is not None and b != a:
                edges.setdefault((a, b), []).append((sym, loc))
    for key in edges:
        edges[key].sort()
    return edges, notes


def strongly_connected(nodes, succ):
    """Tarjan's algorithm, iterative; returns the components, each a sorted list."""
    index = {}
    low = {}
    on_stack = set()
    stack = []
    comps = []
    counter = 0
    for start in sorted(nodes):
        if start in index:
            continue
        work = [(start, iter(sorted(succ.get(start, ()))))]
        index[start] = low[start] = counter
        counter += 1
        stack.append(start)
        on_stack.add(start)
        while work:
            v, it = work[-1]
            advanced = False
            for w in it:
                if w not in index:
                    index[w] = low[w] = counter
                    counter += 1
                    stack.append(w)
                    on_stack.add(w)
                    work.append((w, iter(sorted(succ.get(w, ())))))
                    advanced = True
                    break
                if w in on_stack:
                    low[v] = min(low[v], index[w])
            if advanced:
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[v])
            if low[v] == index[v]:
                comp = []
                while True:
                    w = stack.pop()
                    on_stack.discard(w)
                    comp.append(w)
                    if w == v:
                        break
                comps.append(sorted(comp))
    return comps


def shortest_cycle(comp, succ):
    """The shortest cycle inside one component (breadth-first from each member)."""
    members = set(comp)
    best = None
    for start in comp:
        parent = {start: None}
        queue = [start]
        found = None
        while queue and found is None:
            nxt = []
            for v in queue:
                for w in sorted(succ.get(v, ())):
                    if w not in members:
                        continue
                    if w == start:
                        found = v
                        break
                    if w not in parent:
                        parent[w] = v
                        nxt.append(w)
                if found is not None:
                    break
            queue = nxt
        if found is None:
            continue
        path = [found]
        while parent[path[-1]] is not None:
            path.append(parent[path[-1]])
        path.reverse()
        if best is None or len(path) < len(best):
            best = path
    return best + [best[0]]


# ---- the checks ----------------------------------------------------------------------------

class Check:
    def __init__(self, root, table, objdir, verbose):
        self.root = root
        self.table = table
        self.objdir = objdir
        self.verbose = verbose
        self.sections = []  # (heading, [lines]) printed when not empty
        self.notes = []
        self.cycles = 0
        self.violations = 0
        self.unplaced = 0
        self.allowed_used = set()

    def section(self, heading, lines):
        if lines:
            self.sections.append((heading, lines))

    def allowed(self, a, b):
        if (a, b) in self.table.allow:
            self.allowed_used.add((a, b))
            return True
        return False

    def run(self):
        files = list_dir(self.root, "src", (".c", ".h"))
        modules = sorted({src_module(f) for f in files})
        objects = sorted({src_module(f) for f in files if f.endswith(".c")})
        self.modules = modules
        self.check_placed(files)
        placed = [m for m in modules if m in self.table.layer_of]
        edges, notes = symbol_edges(self.root, self.objdir, objects)
        self.notes += notes
        self.check_cycles(edges)
        self.check_includes(files)
        self.check_symbols(edges)
        self.check_public()
        absent = sorted(set(self.table.layer_of) - set(modules))
        if absent:
            self.notes.append("listed in the table, not in src/: " + " ".join(absent))
        for (a, b), (reason, lineno) in sorted(self.table.allow.items()):
            if (a, b) not in self.allowed_used and a in placed and b in placed:
                self.notes.append("%s:%d: allow %s %s is not needed any more"
                                  % (self.table.path, lineno, a, b))

    def check_placed(self, files):
        lines = []
        for f in files:
            module = src_module(f)
            if module not in self.table.layer_of:
                lines.append("%s: module '%s' is in no layer; add it to a 'layer' line" % (f, module))
        self.unplaced = len(lines)
        self.section("files not placed in %s" % self.table.path, lines)

    def check_cycles(self, edges):
        succ = {}
        for a, b in edges:
            succ.setdefault(a, set()).add(b)
        comps = [c for c in strongly_connected(set(succ) | {b for _, b in edges}, succ) if len(c) > 1]
        lines = []
        for k, comp in enumerate(comps, 1):
            lines.append("cycle %d of %d, %d modules: %s" % (k, len(comps), len(comp), " ".join(comp)))
            lines.append("  for example: " + " -> ".join(shortest_cycle(comp, succ)))
            inside = sorted((a, b) for a, b in edges if a in comp and b in comp)
            rows = []
            for a, b in inside:
                sym, loc = edges[(a, b)][0]
                more = len(edges[(a, b)]) - 1
                mark = ""
                if a in self.table.layer_of and b in self.table.layer_of and not self.table.reaches(a, b):
                    mark = "out of reach"
                rows.append(("%s -> %s" % (a, b), sym + (" (+%d more)" % more if more else ""),
                             loc, mark))
            lines += columns(rows, "  ")
        self.cycles = len(comps)
        self.section("cycles: modules that use each other's tb_ symbols (nm of %s/*.o)" % self.objdir,
                     lines)

    def check_includes(self, files):
        lines = []
        for f in files:
            a = src_module(f)
            for lineno, name, resolved in includes(self.root, f):
                b = src_module(resolved) if resolved else None
                if b is None or a == b:
                    continue
                if a not in self.table.layer_of or b not in self.table.layer_of:
                    continue  # reported as not placed
                if self.table.reaches(a, b) or self.allowed(a, b):
                    continue
                lines.append("%s:%d: %s includes %s: %s"
                             % (f, lineno, a, name, self.table.why_not(a, b)))
        self.violations += len(lines)
        self.section("includes out of reach of the including file's layer", lines)

    def check_symbols(self, edges):
        lines = []
        for (a, b), uses in sorted(edges.items()):
            if a not in self.table.layer_of or b not in self.table.layer_of:
                continue
            if self.table.reaches(a, b) or self.allowed(a, b):
                continue
            self.violations += 1  # one per pair of modules
            shown = uses if self.verbose else uses[:1]
            for sym, loc in shown:
                more = ""
                if not self.verbose and len(uses) > 1:
                    more = " (+%d more)" % (len(uses) - 1)
                lines.append("%s: %s uses %s%s from %s: %s"
                             % (loc or a + ".o", a, sym, more, b, self.table.why_not(a, b)))
        self.section("tb_ symbols used out of reach of the user's layer", lines)

    def check_public(self):
        lines = []
        for f in list_dir(self.root, "include", (".h",)):
            for lineno, name, resolved in includes(self.root, f):
                if resolved and src_module(resolved):
                    lines.append("%s:%d: includes %s: a public header includes no src/ header"
                                 % (f, lineno, resolved))
        self.violations += len(lines)
        self.section("public headers", lines)

    def report(self):
        out = []
        for heading, lines in self.sections:
            out.append("layers: " + heading)
            out += ["  " + line for line in lines]
        if self.verbose:
            out += ["layers: note: " + n for n in self.notes]
        else:
            out += ["layers: note: " + n for n in self.notes if "allow" in n]
        allowed = sorted(self.allowed_used)
        summary = "%d modules, %d cycle%s, %d layer violation%s" % (
            len(self.modules), self.cycles, "" if self.cycles == 1 else "s",
            self.violations, "" if self.violations == 1 else "s")
        if self.unplaced:
            summary += ", %d file%s not placed" % (self.unplaced, "" if self.unplaced == 1 else "s")
        if allowed:
            summary += "; allowed: " + ", ".join("%s -> %s" % e for e in allowed)
        failed = self.cycles or self.violations or self.unplaced
        out.append("layers: %s%s" % ("FAILED: " if failed else "", summary))
        print("\n".join(out))
        return 1 if failed else 0


def columns(rows, indent):
    """Rows of strings as aligned columns (trailing empty cells dropped)."""
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    return [(indent + "  ".join(cell.ljust(w) for cell, w in zip(r, widths))).rstrip() for r in rows]


def main(argv):
    ap = argparse.ArgumentParser(description="module cycles and layer violations of tbeta")
    ap.add_argument("objdir", help="the build's object folder, e.g. build/obj")
    ap.add_argument("--root", default=os.path.dirname(HERE), help="the source tree (default: this checkout)")
    ap.add_argument("--table", help="the layer table (default: ROOT/scripts/layers.txt)")
    ap.add_argument("-v", "--verbose", action="store_true", help="every symbol, and notes")
    args = ap.parse_args(argv)
    root = os.path.abspath(args.root)
    table_path = args.table or os.path.join(root, "scripts", "layers.txt")
    try:
        shown = args.table or os.path.relpath(table_path)
        table = Table(shown if not shown.startswith("..") else table_path)
        if not os.path.isdir(args.objdir):
            raise InputError("%s: no such folder (build first)" % args.objdir)
        check = Check(root, table, args.objdir, args.verbose)
        check.run()
    except (InputError, OSError) as e:
        print("layers: error: %s" % e, file=sys.stderr)
        return 2
    return check.report()


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
