"""Mutation testing of the firmware sources by a vector set: one-token changes, each rebuilt and replayed.

Each operator (arithmetic, bitwise, shift, comparison, logical, increment, compound assignment,
unary minus and not), each integer constant (c -> c+1) and each shift amount that is not a
constant (n -> n+1) inside a function body or a ``#define`` of the firmware files is changed
alone. A mutant is rebuilt on the host (-O1, only the translation units it touches) with the
replay driver and run over the whole vector set; it is caught when the driver's output differs
from the unmutated build's on some vector (or the driver fails). Survivors are either listed in
EQUIVALENT_LIST with the reason they cannot change any output, or are gaps in the vectors.
"""
import concurrent.futures
import dataclasses
import os
import re
import shutil
import sys
import tempfile
import time

from harness.port import c_host
from harness.port.c_coverage import firmware_files, read_reviewed

FLAGS = ("-std=c99", "-O1", "-w")
NICE = ("nice", "-n", "10")
#: The reviewed list of equivalent mutants (tab-separated: file, line, mutation, source text, reason).
EQUIVALENT_LIST = os.path.join("tools", "equivalent_mutants.tsv")
#: A reason in that list starting with this marks a mutant reachable only by a vector too long to
#: ship: not equivalent, counted apart ("size: ...").
#: Functions and macros left alone: API metadata the replay never calls (ld_version, sizes).
SKIP_FUNCTIONS = ("ld_version", "ld_state_size", "ld_params_size")
#: Words after which an operator is unary.
KEYWORDS = ("return", "case", "sizeof")
#: What the replay driver calls (everything else is reached from these).
DRIVER_CALLS = ("ld_init", "ld_reset", "ld_step")
SKIP_MACROS = re.compile(r"LD_VERSION_\w+|LINEDROP_\w+_H")

_TOKEN = re.compile(r"""
    (?P<comment>/\*.*?\*/|//[^\n]*)
  | (?P<string>"(?:\\.|[^"\\])*"|'(?:\\.|[^'\\])*')
  | (?P<number>0[xX][0-9a-fA-F]+[uUlL]*|\d+[uUlL]*)
  | (?P<ident>[A-Za-z_]\w*)
  | (?P<op><<=|>>=|->|\+\+|--|&&|\|\||<<|>>|<=|>=|==|!=|\+=|-=|\*=|/=|&=|\|=|\^=|[-+*/%&|^!~<>=?:;,.(){}\[\]])
  | (?P<space>\s+)
  | (?P<other>.)
""", re.S | re.X)

#: Binary operator replacements (one mutant each).
BINARY = {"+": ["-"], "-": ["+"], "*": ["/"], "/": ["*"], "%": ["*"], "&": ["|"], "|": ["&"], "^": ["|"],
          "<<": [">>"], ">>": ["<<"], "<": ["<="], "<=": ["<"], ">": [">="], ">=": [">"],
          "==": ["!="], "!=": ["=="], "&&": ["||"], "||": ["&&"]}
ASSIGN = {"+=": "-=", "-=": "+=", "|=": "&=", "&=": "|=", "^=": "|=", "<<=": ">>=", ">>=": "<<=",
          "++": "--", "--": "++"}


@dataclasses.dataclass(frozen=True)
class Mutant:
    """One change: in ``file`` replace ``text[start:end]`` by ``new``; ``what`` says it (``< -> <=``).

    ``function`` is the function it sits in (None on a ``#define`` line).
    """
    file: str
    line: int
    start: int
    end: int
    new: str
    what: str
    function: object = None

    def key(self):
        return (self.file, self.line, self.what)


def _tokens(text):
    """``(where, kind, value, start)`` of every token except spaces and comments.

    Preprocessor lines other than ``#define`` are dropped; the tokens of a ``#define`` line
    after the macro's name are kept with ``where`` = ``"define"`` (``"code"`` elsewhere).
    """
    pp = [(m.start(), m.end()) for m in re.finditer(r"^[ \t]*#[^\n]*", text, re.M)]
    out, k = [], 0
    for t in _TOKEN.finditer(text):
        if t.lastgroup in ("space", "comment"):
            continue
        while k < len(pp) and pp[k][1] <= t.start():
            k += 1
        if k < len(pp) and pp[k][0] <= t.start():
            d = re.match(r"[ \t]*#[ \t]*define[ \t]+(\w+)[ \t]*", text[pp[k][0]:pp[k][1]])
            if (d and not SKIP_MACROS.fullmatch(d.group(1)) and t.start() >= pp[k][0] + d.end()
                    and text[pp[k][0] + d.end(1)] != "("):
                out.append(("#define " + d.group(1), t.lastgroup, t.group(), t.start()))
            continue
        out.append(("code", t.lastgroup, t.group(), t.start()))
    return out


def _in_bodies(tokens):
    """Per token, the function whose body holds it (None outside bodies) and the names called
    from bodies.

    A body is a brace opened at depth 0 after ')'; functions in SKIP_FUNCTIONS count as outside.
    A ``#define`` line's tokens belong to ``"#define NAME"``.
    """
    where, depth, fn, body, called = [], 0, None, None, set()
    for k, (kind_where, kind, val, _) in enumerate(tokens):
        if kind_where != "code":
            where.append(kind_where)
            continue
        if val == "(" and k and tokens[k - 1][1] == "ident":
            if depth == 0 and fn is None:
                fn = tokens[k - 1][2]
            elif depth > 0:
                called.add(tokens[k - 1][2])
        if val == "{":
            if depth == 0:
                body = fn if tokens[k - 1][2] == ")" and fn not in SKIP_FUNCTIONS else None
            depth += 1
        elif val == "}":
            depth -= 1
            if depth == 0:
                fn = body = None
        elif depth == 0 and val == ";":
            fn = None
        where.append(body if depth > 0 else None)
    return where, called


def _operand(prev):
    """True when a token ``prev`` ends an operand (so what follows is a binary operator)."""
    return prev is not None and ((prev[1] in ("ident", "number") and prev[2] not in KEYWORDS)
                                 or prev[2] in (")", "]"))


def _shift_amount(tokens, k):
    """(start, end) of a non-constant shift amount after the shift at ``k``, or None."""
    if k + 1 >= len(tokens):
        return None
    first = tokens[k + 1]
    if first[2] == "(":
        depth = 0
        for j in range(k + 1, len(tokens)):
            depth += {"(": 1, ")": -1}.get(tokens[j][2], 0)
            if depth == 0:
                return first[3], tokens[j][3] + 1
        return None
    if first[1] != "ident":
        return None
    j = k + 1
    while j + 2 < len(tokens) and tokens[j + 1][2] in ("->", ".") and tokens[j + 2][1] == "ident":
        j += 2
    return first[3], tokens[j][3] + len(tokens[j][2])


def mutants_of(name, text):
    """Every :class:`Mutant` of the file ``name`` with contents ``text``, in source order."""
    tokens = _tokens(text)
    owner, _ = _in_bodies(tokens)
    out = []

    seen = {}

    def add(start, end, new, what):
        line = text.count("\n", 0, start) + 1
        seen[(line, what)] = seen.get((line, what), 0) + 1
        out.append(Mutant(name, line, start, end, new, f"{what} #{seen[(line, what)]}", owner[k]))

    for k, (where, kind, val, pos) in enumerate(tokens):
        if owner[k] is None:
            continue
        prev = tokens[k - 1] if k else None
        end = pos + len(val)
        if kind == "number":
            m = re.fullmatch(r"(0[xX][0-9a-fA-F]+|\d+)([uUlL]*)", val)
            digits, suffix = m.groups()
            plus = (hex(int(digits, 16) + 1) if digits[:2].lower() == "0x" else str(int(digits) + 1))
            add(pos, end, plus + suffix, f"{val} -> {plus}{suffix}")
        elif val in ASSIGN:
            add(pos, end, ASSIGN[val], f"{val} -> {ASSIGN[val]}")
        elif val in BINARY and _operand(prev):
            for new in BINARY[val]:
                add(pos, end, new, f"{val} -> {new}")
            span = _shift_amount(tokens, k) if val in ("<<", ">>") else None
            if span:
                amount = text[span[0]:span[1]]
                add(span[0], span[1], f"({amount} + 1u)", f"{val} {amount} -> {val} ({amount} + 1u)")
        elif val in ("-", "!") and not _operand(prev):
            add(pos, end, "", f"drop unary {val}")
    return out


def all_mutants(src_dir):
    """Mutants of every firmware file of ``src_dir``."""
    out = []
    for name in firmware_files(src_dir):
        with open(os.path.join(src_dir, name)) as f:
            out += mutants_of(name, f.read())
    return out


def uncalled(src_dir):
    """Functions no firmware function and no replay entry point calls, and ``#define NAME`` of
    macros no code uses (a macro only tested by ``#if defined`` counts as unused: its value
    does not matter)."""
    defined, called = set(), set(DRIVER_CALLS)
    for name in firmware_files(src_dir):
        with open(os.path.join(src_dir, name)) as f:
            tokens = _tokens(f.read())
        owner, calls = _in_bodies(tokens)
        defined |= {o for o in owner if o}
        called |= calls | {"#define " + val for where, kind, val, _ in tokens if kind == "ident"}
    return defined - called


def read_equivalent(src_dir, path=None):
    """The reviewed list as ``{(file, line, mutation): reason}``, each entry found by its text."""
    lines = {}

    def lines_of(name):
        if name not in lines:
            with open(os.path.join(src_dir, name)) as g:
                lines[name] = g.read().splitlines()
        return lines[name]

    return read_reviewed(path or os.path.join(src_dir, EQUIVALENT_LIST), lines_of, "mutation",
                         "harness.port.c_mutants")


class _Worker:
    """A scratch copy of the sources with objects of the unmutated build, to rebuild mutants in."""

    def __init__(self, root, src_dir):
        self.src = os.path.join(root, "src")
        self.obj = os.path.join(root, "obj")
        shutil.copytree(src_dir, self.src, ignore=shutil.ignore_patterns("*.so", "*.o", "__pycache__"))
        self.exe = c_host.build_driver(self.obj, FLAGS, self.src)
        self.objs = [os.path.join(self.obj, os.path.basename(n)[:-2] + ".o")
                     for n in (c_host.DRIVER, *c_host.algo_sources())]

    def run(self, mutant, text_path):
        """Driver exit status and output with ``mutant`` applied (None, message if it does not build)."""
        path = os.path.join(self.src, mutant.file)
        with open(path) as f:
            original = f.read()
        units = ((c_host.DRIVER, *c_host.algo_sources()) if mutant.file.endswith(".h") else (mutant.file,))
        tmp = os.path.join(self.obj, "mutant")
        os.makedirs(tmp, exist_ok=True)
        try:
            with open(path, "w") as f:
                f.write(original[:mutant.start] + mutant.new + original[mutant.end:])
            objs = {}
            for unit in units:
                obj = os.path.join(tmp, os.path.basename(unit)[:-2] + ".o")
                err = c_host.compile_object(os.path.join(self.src, unit), obj, FLAGS, self.src, NICE)
                if err:
                    return "stillborn", err
                objs[os.path.basename(unit)[:-2] + ".o"] = obj
            exe = os.path.join(tmp, "replay")
            err = c_host.link([objs.get(os.path.basename(o), o) for o in self.objs], exe, FLAGS, NICE)
            if err:
                return "stillborn", err
            return c_host.replay(exe, text_path, prefix=NICE)
        finally:
            with open(path, "w") as f:
                f.write(original)


def _first_line(a, b):
    """Index of the first line where byte strings ``a`` and ``b`` differ."""
    n = min(len(a), len(b))
    k = next((j for j in range(0, n, 65536) if a[j:j + 65536] != b[j:j + 65536]), None)
    if k is None:
        return a.count(b"\n", 0, n)
    k = next(j for j in range(k, min(k + 65536, n) + 1) if j == n or a[j] != b[j])
    return a.count(b"\n", 0, k)


def run(params, vectors, src_dir=None, jobs=2, chosen=None, equivalent_path=None):
    """Run the mutants of ``src_dir`` (default c_ref) over ``vectors`` (code-array pairs).

    ``chosen`` (a list of Mutant) limits the run. Returns a dict: ``results`` maps each mutant to
    ``("caught", case index, operation index)`` (cases as c_host.replay_cases: index k below
    len(vectors) is vector k through ld_step, the sample index; above it, vector
    k - len(vectors) through the interrupt path), ``("survived",)``, ``("equivalent", reason)``,
    ``("size", reason)`` (listed as reachable only by a vector too long to ship: not equivalent,
    counted apart) or ``("stillborn",)``, with the counts and the wall time.
    """
    src_dir = src_dir or c_host.c_ref_dir()
    equivalent = read_equivalent(src_dir, equivalent_path)
    dead = uncalled(src_dir)
    mutants = all_mutants(src_dir) if chosen is None else list(chosen)
    started = time.monotonic()
    cases = c_host.replay_cases(params, vectors)
    bounds, total = [], 0
    for ops in cases:
        total += len(ops)
        bounds.append(total)
    with tempfile.TemporaryDirectory(prefix="ld-mut-") as tmp:
        text = os.path.join(tmp, "vectors.ldtv")
        with open(text, "w") as f:
            f.write(c_host.vector_text(params, cases))
        workers = [_Worker(os.path.join(tmp, f"w{k}"), src_dir) for k in range(jobs)]
        status, reference = c_host.replay(workers[0].exe, text)
        if status != 0:
            raise RuntimeError(f"the unmutated replay exited with {status}")
        free = list(workers)

        def one(m):
            w = free.pop()
            try:
                return m, w.run(m, text)
            finally:
                free.append(w)

        results = {}
        with concurrent.futures.ThreadPoolExecutor(max_workers=jobs) as pool:
            for m, (st, out) in pool.map(one, mutants):
                if st == "stillborn":
                    results[m] = ("stillborn",)
                elif st != 0 or out != reference:
                    line = min(_first_line(out, reference), total - 1)
                    vec = next(k for k, b in enumerate(bounds) if line < b)
                    results[m] = ("caught", vec, line - (bounds[vec - 1] if vec else 0))
                elif m.function in dead:
                    results[m] = ("equivalent", f"in {m.function}, which no firmware code uses")
                elif m.key() in equivalent:
                    why = equivalent[m.key()]
                    results[m] = ("size" if why.startswith("size:") else "equivalent", why)
                else:
                    results[m] = ("survived",)
    kinds = [r[0] for r in results.values()]
    stale = [k for k in equivalent if any(m.key() == k and results[m][0] == "caught" for m in results)]
    return {"results": results, "mutants": len(results) - kinds.count("stillborn"),
            "caught": kinds.count("caught"), "equivalent": kinds.count("equivalent"),
            "survived": kinds.count("survived"), "size": kinds.count("size"),
            "stillborn": kinds.count("stillborn"),
            "listed_but_caught": stale, "wall_s": round(time.monotonic() - started, 1)}


def summary(outcome):
    """The figures a provenance note records (not the wall time: a rerun writes the same note)."""
    return {k: outcome[k] for k in ("mutants", "caught", "equivalent", "size", "survived", "stillborn")}


def main(argv=None):
    """``python -m harness.port.c_mutants VECTORS_DIR``: run every mutant, print survivors as list lines."""
    from harness.port.vector_files import find_sets, read_set
    argv = sys.argv[1:] if argv is None else argv
    if len(argv) != 1:
        print("usage: python -m harness.port.c_mutants VECTORS_DIR", file=sys.stderr)
        return 2
    src = c_host.c_ref_dir()
    vectors, params = [], None
    for note in find_sets(argv[0]):
        params, vecs = read_set(note)
        vectors += [(r[:, 0], r[:, 1]) for _, r in vecs]
    out = run(params, vectors)
    lines = {}
    for m, r in sorted(out["results"].items(), key=lambda kv: (kv[0].file, kv[0].start)):
        if r[0] == "survived":
            if m.file not in lines:
                with open(os.path.join(src, m.file)) as f:
                    lines[m.file] = f.read().splitlines()
            print(f"survived\t{m.file}\t{m.line}\t{m.what}\t{lines[m.file][m.line - 1].strip()}\tREASON?")
    print({**summary(out), "wall_s": out["wall_s"]})
    return 0


if __name__ == "__main__":
    sys.exit(main())
