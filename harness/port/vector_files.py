"""Vector set files: per-vector CSVs, a JSON provenance note and the params header; write and read back.

A vector set for scenario ``<stem>`` is ``<stem>-<vector>.csv`` (one per
vector), ``<stem>-vectors.json`` (provenance: scenario and its hash, the
algorithm settings, word lengths, the params and their fingerprint, tool
version, generator seed, and each CSV's sample count and hash) and
``<stem>-params.h`` (the params as a flash-able C initialiser). A folder may hold several sets;
writing one fills a new folder beside it (the other sets copied across) and swaps it in whole,
so a failed or interrupted run leaves the old folder exactly as it was.
"""
import dataclasses
import hashlib
import json
import os
import re
import shutil

import numpy as np

from algo import VERSION
from algo.params import PARAM_FIELDS, Params
from algo.state import STATE_FIELDS
from harness.atomic import atomic_folder
from harness.errors import InputError
from harness.port.params_header import params_header

FORMAT = "linedrop-vectors 1"
COLUMNS = ["adc_v", "adc_i", "command"] + STATE_FIELDS
PROVENANCE_SUFFIX = "-vectors.json"
WORD_LENGTH_SETTINGS = ("adc_bits", "dac_bits", "table_bits", "acc_bits", "r_frac_bits", "corr_frac_bits")


def sha256_bytes(data):
    return hashlib.sha256(data).hexdigest()


def csv_text(vector):
    """CSV text of one vector: the COLUMNS header, then inputs, command and state per sample."""
    rows = np.column_stack([vector.adc_v, vector.adc_i, vector.trace])
    lines = [",".join(COLUMNS)] + [",".join(map(str, r)) for r in rows.tolist()]
    return "\n".join(lines) + "\n"


def state_types():
    """C type of every ld_state_t field, read from the compiled C reference."""
    from c_ref.binding import ffi
    return {name: f.type.cname for name, f in ffi.typeof("ld_state_t").fields if name in STATE_FIELDS}


def provenance(scenario_name, scenario_bytes, cfg, params, seed, entries):
    """The provenance note (a dict, key order fixed) of a vector set."""
    return {
        "format": FORMAT,
        "tool_version": VERSION,
        "scenario": {"file": scenario_name, "sha256": sha256_bytes(scenario_bytes)},
        "generator_seed": seed,
        "algo_config": dataclasses.asdict(cfg),
        "word_lengths": {**{k: getattr(cfg, k) for k in WORD_LENGTH_SETTINGS}, "state": state_types()},
        "params_fingerprint": params.fingerprint(),
        "params": {name: (list(getattr(params, name)) if name == "ref_tab" else getattr(params, name))
                   for name in PARAM_FIELDS},
        "vectors": entries,
    }


def _guard(stem):
    return "LINEDROP_PARAMS_" + re.sub(r"[^A-Za-z0-9]", "_", stem).upper() + "_H"


def set_names(stem, vector_names):
    """File names of the set ``stem`` with these vectors: the CSVs, the params header, the note."""
    return [f"{stem}-{n}.csv" for n in vector_names] + [f"{stem}-params.h", stem + PROVENANCE_SUFFIX]


def _listed(note_path):
    """Names a provenance note accounts for: itself, its params header and its vector files."""
    note = read_note(note_path)
    names = [note.get("params_header")] + [e.get("file") for e in note.get("vectors", [])
                                           if isinstance(e, dict)]
    return {os.path.basename(note_path)} | {n for n in names
                                            if isinstance(n, str) and n and os.path.basename(n) == n}


def folder_plan(out_dir, names):
    """What writing the files ``names`` into ``out_dir`` keeps and what it may replace.

    Returns ``(kept, ours)``: the files of the other vector sets there (copied into the new
    folder), and every name the folder may hold without being refused (those, ``names``, and
    the files of the old set being rewritten, which the new one replaces).
    """
    if not os.path.isdir(out_dir):
        return [], set(names)
    mine = set(names)
    note = next(n for n in names if n.endswith(PROVENANCE_SUFFIX))
    kept, old = set(), set()
    for path in (os.path.join(out_dir, n) for n in os.listdir(out_dir) if n.endswith(PROVENANCE_SUFFIX)):
        (old if os.path.basename(path) == note else kept).update(_listed(path))
    kept = {n for n in kept - mine if os.path.isfile(os.path.join(out_dir, n))}
    return sorted(kept), kept | mine | old


def write_set(out_dir, stem, scenario_name, scenario_bytes, cfg, params, seed, vectors, option="--out",
              extra=None):
    """Write a vector set into ``out_dir``, swapped in whole with any other sets kept.

    ``extra`` (a dict) is added to the provenance note (the C figures of ``--coverage``).

    Returns the paths of the set's files, in order.
    """
    names = set_names(stem, [v.name for v in vectors])
    kept, ours = folder_plan(out_dir, names)
    with atomic_folder(out_dir, ours, option) as folder:
        for name in kept:
            shutil.copy2(os.path.join(out_dir, name), os.path.join(folder, name))
        _fill(folder, stem, scenario_name, scenario_bytes, cfg, params, seed, vectors, extra or {})
    return [os.path.join(out_dir, n) for n in names]


def _fill(folder, stem, scenario_name, scenario_bytes, cfg, params, seed, vectors, extra):
    entries = []
    for vec in vectors:
        name = f"{stem}-{vec.name}.csv"
        text = csv_text(vec)
        with open(os.path.join(folder, name), "w", newline="") as f:
            f.write(text)
        entries.append({"file": name, "name": vec.name, "description": vec.description,
                        "samples": len(vec.adc_v), "sha256": sha256_bytes(text.encode())})
    header = f"{stem}-params.h"
    comment = f"Params of the golden vectors {stem}-*.csv (scenario {scenario_name})."
    with open(os.path.join(folder, header), "w") as f:
        f.write(params_header(params, guard=_guard(stem), comment=comment))
    note = provenance(scenario_name, scenario_bytes, cfg, params, seed, entries)
    note["params_header"] = header
    note.update(extra)
    with open(os.path.join(folder, stem + PROVENANCE_SUFFIX), "w") as f:
        f.write(json.dumps(note, indent=1) + "\n")


def params_from_note(note, path):
    """The Params a provenance note records, checked against its fingerprint."""
    try:
        raw = note["params"]
        params = Params(**{k: (tuple(raw[k]) if k == "ref_tab" else int(raw[k])) for k in PARAM_FIELDS})
    except (KeyError, TypeError, ValueError) as exc:
        raise InputError(f"{path}: params: missing or malformed ({exc.__class__.__name__}: {exc})") from None
    if params.fingerprint() != note.get("params_fingerprint"):
        raise InputError(f"{path}: params do not match params_fingerprint "
                         f"{note.get('params_fingerprint')!r} (got {params.fingerprint()}); regenerate the set")
    return params


def read_note(path):
    """Parse and check one provenance note."""
    try:
        with open(path, encoding="utf-8") as f:
            note = json.load(f)
    except OSError as exc:
        raise InputError(f"{path}: cannot read: {exc.strerror}") from None
    except json.JSONDecodeError as exc:
        raise InputError(f"{path}: not valid JSON: {exc}") from None
    if not isinstance(note, dict) or note.get("format") != FORMAT:
        raise InputError(f"{path}: not a linedrop vector set (format must be {FORMAT!r})")
    return note


def find_sets(vec_dir):
    """Provenance notes (paths) of every vector set in ``vec_dir``, sorted."""
    if not os.path.isdir(vec_dir):
        raise InputError(f"{vec_dir}: no such directory of vectors")
    found = sorted(n for n in os.listdir(vec_dir) if n.endswith(PROVENANCE_SUFFIX))
    if not found:
        raise InputError(f"{vec_dir}: no vector set (*{PROVENANCE_SUFFIX}); write one with 'linedrop vectors'")
    return [os.path.join(vec_dir, n) for n in found]


def parse_vector_csv(path, text):
    """Rows of a vector or log CSV (header exactly COLUMNS) as an int64 array of shape (T, len(COLUMNS)).

    The header names ``cmd`` twice: column 2 is what ld_step returned, the later
    one the state's ``cmd`` field; columns are therefore taken by position.
    """
    lines = text.splitlines()
    if not lines or [h.strip() for h in lines[0].split(",")] != COLUMNS:
        raise InputError(f"{path}: row 1: header must be {','.join(COLUMNS)}")
    if len(lines) < 2:
        raise InputError(f"{path}: no samples after the header")
    try:
        cells = np.array(",".join(lines[1:]).split(","), dtype=np.int64)
        if cells.size == len(COLUMNS) * (len(lines) - 1):
            return cells.reshape(len(lines) - 1, len(COLUMNS))
    except (ValueError, OverflowError):
        pass
    for n, line in enumerate(lines[1:], 2):     # slow path, only to name the bad row (header: row 1)
        values = line.split(",")
        if len(values) != len(COLUMNS):
            raise InputError(f"{path}: row {n}: {len(values)} values, expected {len(COLUMNS)}")
        for col, value in zip(COLUMNS, values):
            try:
                int(value)
            except ValueError:
                raise InputError(f"{path}: row {n}: {col} = {value!r} is not an integer") from None
    raise InputError(f"{path}: a value does not fit int64")


def read_set(note_path):
    """One vector set: ``(params, [(csv name, rows), ...])`` with rows as parse_vector_csv; hashes checked."""
    note = read_note(note_path)
    params = params_from_note(note, note_path)
    folder = os.path.dirname(note_path)
    vectors = []
    for entry in note.get("vectors", []):
        path = os.path.join(folder, entry["file"])
        try:
            with open(path, "rb") as f:
                data = f.read()
        except OSError as exc:
            raise InputError(f"{path}: cannot read vector file: {exc.strerror}") from None
        if sha256_bytes(data) != entry.get("sha256"):
            raise InputError(f"{path}: contents differ from the hash in {os.path.basename(note_path)}; "
                             f"regenerate the set")
        vectors.append((entry["file"], parse_vector_csv(path, data.decode())))
    if not vectors:
        raise InputError(f"{note_path}: lists no vector files")
    return params, vectors
