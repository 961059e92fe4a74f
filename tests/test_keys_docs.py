"""SCENARIO_KEYS.md agrees with the code on every key, range and default.

The tables of harness/scenario/SCENARIO_KEYS.md (the user's reference) are parsed and held
to the reader's rules (harness.scenario.keys, the data the reader checks with) and to the
algorithm's settings (algo.config.SETTINGS); defaults are checked by reading a scenario that
gives only the required keys, and every upper bound by writing a value above it and
reading the one-line error, which must name the key as the user wrote it and the range the
table gives.
"""
import re
from pathlib import Path

import pytest

from algo.config import SETTINGS
from harness.errors import InputError
from harness.scenario.algo_setup import FROM_PLANT, algo_config
from harness.scenario.keys import KEYS, LOAD_KIND_KEYS, Choice, Range
from harness.scenario.read import load_scenario
from harness.scenario.specs import LOAD_KINDS

DOC = Path(__file__).resolve().parent.parent / "harness" / "scenario" / "SCENARIO_KEYS.md"
INTERVAL = re.compile(r"(integer |power of two )?([\[(])([^,\[\]()]+), ([^\[\]()]+?)([\])])")
BASE = {"supply": "target_v = 24.0", "cable": "length_m = 100.0\nconductor_mm2 = 1.5",
        "load_end": "capacitance_f = 1e-3", "load": 'kind = "constant_current"\ncurrent_a = 1.0'}
ALGORITHM = {k: s for k, s in SETTINGS.items() if k not in FROM_PLANT}


def _tables():
    """{section: [row dict by column name]} of every ``## [section]`` table."""
    out, section, header = {}, None, None
    for line in DOC.read_text(encoding="utf-8").splitlines():
        m = re.match(r"## \[\[?(\w+)\]\]?", line)
        if m:
            section, header = m.group(1), None
            out[section] = []
        elif section and line.startswith("|") and not line.startswith("| ---"):
            cells = [c.strip() for c in line.strip("|").split("|")]
            if header is None:
                header = cells
            else:
                out[section].append(dict(zip(header, cells)))
    return out


def _rows(section):
    """(key, row, allowed text of that key) for every key of a section's table."""
    out = []
    for row in _tables()[section]:
        keys = row["key"].split(", ")
        parts = [m.group(0) for m in INTERVAL.finditer(row["allowed"])] if len(keys) > 1 else [None]
        out += [(k, row, p) for k, p in zip(keys, parts)]
    return out


def _bound(text):
    """A bound as the code holds it: a number, or the name of a key."""
    try:
        return float(eval(text.replace("^", "**").replace("−", "-"), {}))   # "2^63 − 1", "1e6"
    except (NameError, SyntaxError):
        return text


def _interval(text):
    m = INTERVAL.search(text)
    assert m, f"no interval in {text!r}"
    word, lb, lo, hi, rb = m.groups()
    return word, (_bound(lo), _bound(hi), lb == "(", rb == ")")


def _same(doc, code):
    return doc == code if isinstance(doc, str) or isinstance(code, str) else doc == pytest.approx(code)


@pytest.mark.parametrize("section", list(KEYS))
def test_every_key_the_reader_allows_is_documented_and_no_other(section):
    assert sorted(k for k, _, _ in _rows(section)) == sorted(KEYS[section])


def test_algorithm_table_lists_every_setting_a_scenario_may_set():
    assert [k for k, _, _ in _rows("algorithm")] == list(ALGORITHM)


@pytest.mark.parametrize("section, key", [(s, k) for s in KEYS for k in KEYS[s]])
def test_documented_range_is_the_one_the_reader_checks(section, key):
    (row, part), = [(r, p) for k, r, p in _rows(section) if k == key]
    rule = KEYS[section][key]
    allowed = row["allowed"] if part is None else part
    if isinstance(rule, Choice):
        named = re.findall(r'"(\w+)"', allowed) or allowed.split(", ")
        assert sorted(named) == sorted(rule.options), (allowed, rule.options)
    elif isinstance(rule, Range):
        word, (lo, hi, lo_open, hi_open) = _interval(allowed)
        assert (word == "integer ") == rule.integer, allowed
        assert _same(lo, rule.lo) and _same(hi, rule.hi), (allowed, rule)
        assert (lo_open, hi_open) == (rule.lo_open, rule.hi_open), (allowed, rule)


@pytest.mark.parametrize("key", list(ALGORITHM))
def test_algorithm_row_gives_the_settings_default_and_range(key):
    (row, _), = [(r, p) for k, r, p in _rows("algorithm") if k == key]
    s = SETTINGS[key]
    word, (lo, hi, lo_open, hi_open) = _interval(row["allowed"])
    assert word == ("power of two " if s.pow2 else "integer " if s.kind is int else None) or \
        (word is None and s.kind is float), row
    assert (lo, hi, lo_open, hi_open) == (pytest.approx(s.lo), pytest.approx(s.hi), False, False), row
    assert float(row["default"]) == pytest.approx(s.default), row


def test_load_keys_by_kind_match_the_kinds_column():
    for key, row, _ in _rows("load"):
        kinds = row["kinds"]
        documented = (set(LOAD_KINDS) if kinds == "all" else set(LOAD_KINDS) - {"lamp"} if kinds == "all but lamp"
                      else set(kinds.split(", ")))
        assert documented == {k for k in LOAD_KINDS if key in LOAD_KIND_KEYS[k]}, key


def _scenario(tmp_path, extra_section=None, extra=""):
    parts = dict(BASE)
    if extra_section:
        key = extra.split(" = ")[0]
        kept = [line for line in parts.get(extra_section, "").splitlines() if not line.startswith(key + " ")]
        parts[extra_section] = "\n".join(kept + [extra])
    path = tmp_path / "s.toml"
    path.write_text("".join(f"[{s}]\n{body}\n\n" for s, body in parts.items()))
    return path


@pytest.mark.parametrize("section", ["supply", "cable", "load_end", "sensing", "run"])
def test_documented_defaults_are_what_the_reader_fills_in(tmp_path, section):
    sc = load_scenario(_scenario(tmp_path))
    spec = getattr(sc, section)
    checked = 0
    for key, row, _ in _rows(section):
        text, got = row["default"], getattr(spec, key)
        m = re.fullmatch(r"([\d.]+) × (\w+)(?:, else ([\d.]+))?", text)
        if re.fullmatch(r"-?[\d.e+-]+", text):
            want = float(text)
        elif text == "none":
            want = None
        elif text.startswith('"'):
            want = text.strip('"')
        elif m:
            other = getattr(spec, m.group(2), None)
            other = getattr(sc.supply, m.group(2)) if other is None and m.group(3) is None else other
            want = float(m.group(3)) if other is None else float(m.group(1)) * other
        else:
            continue     # required, or a rule in words ("from gauge")
        checked += 1
        assert got == (want if want is None or isinstance(want, str) else pytest.approx(want)), (key, text)
    assert checked >= 2


def _above(rule_hi, integer):
    return rule_hi + 1 if integer else rule_hi + max(1.0, abs(rule_hi))


ABOVE = [(s, k) for s in ("supply", "cable", "load_end", "sensing", "run") for k, r in KEYS[s].items()
         if isinstance(r, Range) and not isinstance(r.hi, str)] + [("algorithm", k) for k in ALGORITHM]


@pytest.mark.parametrize("section, key", ABOVE)
def test_value_above_the_range_names_the_users_key_and_the_documented_range(tmp_path, section, key):
    (row, _), = [(r, p) for k, r, p in _rows(section) if k == key]
    word, documented = _interval(row["allowed"])
    value = _above(documented[1], word is not None)
    if word == "power of two ":
        value = 2 * int(documented[1])
    path = _scenario(tmp_path, section, f"{key} = {int(value) if word else float(value)!r}")
    if key == "awg":
        path.write_text(path.read_text().replace("conductor_mm2 = 1.5\n", ""))
    with pytest.raises(InputError) as exc:
        algo_config(load_scenario(path))
    msg = str(exc.value)
    assert f": {section}.{key} = " in msg and "\n" not in msg, msg
    _, shown = _interval(re.sub(r"\w+ = ", "", msg.split(": must be ")[-1]))
    lo, hi = documented[:2]
    assert shown[1] == pytest.approx(hi) and shown[2:] == documented[2:], (msg, row["allowed"])
    assert isinstance(lo, str) or shown[0] == pytest.approx(lo), (msg, row["allowed"])


def test_sensing_adc_bits_out_of_range_names_sensing_not_algorithm(tmp_path):
    with pytest.raises(InputError) as exc:
        algo_config(load_scenario(_scenario(tmp_path, "sensing", "adc_bits = 20")))
    assert "sensing.adc_bits = 20: must be an integer in [8, 16]" in str(exc.value)
    assert "algorithm." not in str(exc.value)


def test_unknown_key_lists_every_key_of_the_section(tmp_path):
    for section, kind_keys in [("sensing", KEYS["sensing"]), ("load", LOAD_KIND_KEYS["constant_current"])]:
        with pytest.raises(InputError) as exc:
            load_scenario(_scenario(tmp_path, section, "bogus = 1"))
        allowed = str(exc.value).split("allowed: ")[1].split(", ")
        assert sorted(allowed) == sorted(kind_keys), str(exc.value)
