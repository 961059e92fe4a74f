"""Branch coverage of the firmware sources by a vector set: gcc --coverage -O0, replay, gcov's JSON.

Every branch gcov counts in the firmware files (c_ref/cortexm/build.py's ALGO_SOURCES and the
c_ref headers they include) is keyed ``(file, line, branch index within the line)``; a header's
branch is taken when any translation unit's copy takes it. Branches the range analysis proves
dead are listed, with the reason, in UNREACHABLE_LIST (regenerate its lines with
``python -m harness.port.c_coverage VECTORS_DIR``); reachable-branch coverage leaves them out.
"""
import dataclasses
import json
import os
import subprocess
import sys
import tempfile

from harness.errors import InputError
from harness.port import c_host

#: gcc flags of the coverage build: no optimisation, so each source branch stays a branch.
FLAGS = ("-std=c99", "-O0", "--coverage")
#: The reviewed list of unreachable branches (tab-separated: file, line, branch, source text, reason).
UNREACHABLE_LIST = os.path.join("tools", "unreachable_branches.tsv")


@dataclasses.dataclass
class Coverage:
    """Branch counts ``{(file, line, branch): times taken}``, the source lines, the reviewed list.

    ``unreachable`` maps a key to its reason; ``lines`` holds each firmware file's lines;
    ``listed_taken`` the listed branches these vectors take all the same (other params can
    reach what the shipped ones cannot): counted as taken, shown for review.
    """
    counts: dict
    lines: dict
    unreachable: dict
    listed_taken: list = dataclasses.field(default_factory=list)

    def untaken(self, reachable_only=True):
        """Keys of branches never taken, sorted (by default without the listed unreachable ones)."""
        return sorted(k for k, n in self.counts.items()
                      if n == 0 and not (reachable_only and k in self.unreachable))

    def per_file(self):
        """``{file: (branches, taken, unreachable)}``."""
        out = {}
        for key, n in self.counts.items():
            total, taken, dead = out.get(key[0], (0, 0, 0))
            out[key[0]] = (total + 1, taken + (n > 0), dead + (key in self.unreachable))
        return dict(sorted(out.items()))

    def reachable_percent(self):
        """Share of reachable branches taken, %, rounded to 0.01."""
        reachable = [k for k in self.counts if k not in self.unreachable]
        taken = sum(self.counts[k] > 0 for k in reachable)
        return round(100.0 * taken / len(reachable), 2) if reachable else 100.0

    def all_percent(self):
        """Share of all branches taken, %, rounded to 0.01."""
        return round(100.0 * sum(n > 0 for n in self.counts.values()) / len(self.counts), 2)

    def summary(self):
        """The figures a provenance note records."""
        kinds = [why.split(":", 1)[0] for why in self.unreachable.values()]
        return {"branches": len(self.counts), "taken": sum(n > 0 for n in self.counts.values()),
                "unreachable": len(self.unreachable), "unreachable_dead": kinds.count("dead"),
                "unreachable_size": kinds.count("size"), "all_percent": self.all_percent(),
                "reachable_percent": self.reachable_percent(),
                "untaken_reachable": [f"{f}:{line}" for f, line, _ in self.untaken()],
                "listed_but_taken": [f"{f}:{line}" for f, line, _ in self.listed_taken]}


def firmware_files(src_dir):
    """Names (relative to ``src_dir``) of the firmware sources and the headers beside them."""
    headers = sorted(n for n in os.listdir(src_dir) if n.endswith(".h"))
    return list(c_host.algo_sources()) + headers


def _gcov_counts(build_dir, src_dir):
    names = set(firmware_files(src_dir))
    counts = {}
    for src in c_host.algo_sources():
        gcda = os.path.join(build_dir, src[:-2] + ".gcda")
        res = subprocess.run(["gcov", "--json-format", "--stdout", "--branch-probabilities", gcda],
                             capture_output=True, text=True, cwd=build_dir)
        if res.returncode != 0:
            raise RuntimeError(f"gcov {gcda} failed: {res.stderr.strip()[:300]}")
        for doc in res.stdout.splitlines():
            for entry in json.loads(doc)["files"]:
                name = os.path.relpath(os.path.realpath(entry["file"]), os.path.realpath(src_dir))
                if name not in names:
                    continue
                for line in entry["lines"]:
                    for k, br in enumerate(line["branches"]):
                        key = (name, line["line_number"], k)
                        counts[key] = counts.get(key, 0) + br["count"]
    return counts


def read_lines(src_dir):
    """``{file: [source lines]}`` of the firmware files."""
    out = {}
    for name in firmware_files(src_dir):
        with open(os.path.join(src_dir, name)) as f:
            out[name] = f.read().splitlines()
    return out


def _locate(lines, line, text):
    """Line number (1-based) nearest ``line`` whose stripped text is ``text``, or None."""
    hits = [n for n, t in enumerate(lines, 1) if t.strip() == text]
    return min(hits, key=lambda n: abs(n - line)) if hits else None


def read_reviewed(path, lines_of, third, tool):
    """A reviewed tab-separated list (file, line, ``third``, source text, reason) as
    ``{(file, line, third): reason}``, each entry found by its text nearest its line.

    ``lines_of(name)`` gives a source file's lines; an entry whose text is no longer there is an
    error naming the list's line and ``tool``, the module that prints lines to review.
    """
    out = {}
    with open(path) as f:
        for n, raw in enumerate(f, 1):
            if not raw.strip() or raw.startswith("#"):
                continue
            cells = raw.rstrip("\n").split("\t")
            if len(cells) != 5:
                raise InputError(f"{path}: line {n}: 5 tab-separated cells expected "
                                 f"(file, line, {third}, source text, reason), got {len(cells)}")
            name, line, key, text, reason = cells
            found = _locate(lines_of(name), int(line), text.strip())
            if found is None:
                raise InputError(f"{path}: line {n}: {name} has no line {text.strip()!r} any more; "
                                 f"review the list (python -m {tool})")
            out[(name, found, key)] = reason
    return out


def read_unreachable(src_dir, lines, path=None):
    """The reviewed list as ``{(file, line, branch): reason}``, each entry found by its text.

    An entry whose file or text is no longer there is an error naming the list's line.
    """
    listed = read_reviewed(path or os.path.join(src_dir, UNREACHABLE_LIST),
                           lambda name: lines.get(name, []), "branch", "harness.port.c_coverage")
    return {(name, line, int(branch)): reason for (name, line, branch), reason in listed.items()}


def measure(params, vectors, src_dir=None, unreachable_path=None):
    """Branch coverage of the sources in ``src_dir`` (default c_ref) by ``vectors`` (code-array pairs),
    replayed through ld_step and through the interrupt path (c_host.replay_cases).

    Returns a :class:`Coverage`.
    """
    src_dir = src_dir or c_host.c_ref_dir()
    with tempfile.TemporaryDirectory(prefix="ld-cov-") as tmp:
        exe = c_host.build_driver(tmp, FLAGS, src_dir)
        text = os.path.join(tmp, "vectors.ldtv")
        with open(text, "w") as f:
            f.write(c_host.vector_text(params, c_host.replay_cases(params, vectors)))
        status, _ = c_host.replay(exe, text, cwd=tmp)
        if status != 0:
            raise RuntimeError(f"the coverage build's replay exited with {status}")
        counts = _gcov_counts(tmp, src_dir)
    lines = read_lines(src_dir)
    listed = read_unreachable(src_dir, lines, unreachable_path)
    missing = [k for k in listed if k not in counts]
    if missing:
        f, line, b = missing[0]
        raise InputError(f"{UNREACHABLE_LIST}: {f}:{line} has no branch {b}; regenerate the list "
                         f"(python -m harness.port.c_coverage)")
    dead = {k: why for k, why in listed.items() if counts[k] == 0}
    return Coverage(counts, lines, dead, sorted(k for k in listed if counts[k] > 0))


def report(cov):
    """Text report: per file, the figures, every untaken reachable branch, then the list's own."""
    out = [f"{'file':<14}{'branches':>9}{'taken':>7}{'unreach.':>9}{'taken %':>9}"]
    for f, (total, taken, dead) in cov.per_file().items():
        share = 100.0 * taken / (total - dead) if total > dead else 100.0
        out.append(f"{f:<14}{total:>9}{taken:>7}{dead:>9}{share:>9.1f}")
    out.append(f"all branches {cov.all_percent():.2f} %, reachable branches {cov.reachable_percent():.2f} %")
    for key in cov.untaken():
        out.append("untaken\t" + tsv_line(cov, key, "REASON?"))
    for key, reason in sorted(cov.unreachable.items()):
        out.append("listed\t" + tsv_line(cov, key, reason))
    for key in cov.listed_taken:
        out.append("listed but taken (review)\t" + tsv_line(cov, key, ""))
    return "\n".join(out)


def tsv_line(cov, key, reason):
    """A line of the reviewed list for branch ``key``."""
    f, line, b = key
    return f"{f}\t{line}\t{b}\t{cov.lines[f][line - 1].strip()}\t{reason}"


def main(argv=None):
    """``python -m harness.port.c_coverage VECTORS_DIR``: print the report of the set(s) there."""
    from harness.port.vector_files import find_sets, read_set
    argv = sys.argv[1:] if argv is None else argv
    if len(argv) != 1:
        print("usage: python -m harness.port.c_coverage VECTORS_DIR", file=sys.stderr)
        return 2
    for note in find_sets(argv[0]):
        params, vecs = read_set(note)
        print(report(measure(params, [(r[:, 0], r[:, 1]) for _, r in vecs])))
    return 0


if __name__ == "__main__":
    sys.exit(main())
