"""Text vector files (c_ref/textvec.py): writing and reading back lose nothing; bad output is refused."""
import pytest
from hypothesis import given, settings, strategies as st

from c_ref import textvec
from harness.proof import algo_strategies as sa


@st.composite
def _cases(draw):
    out = []
    for _ in range(draw(st.integers(1, 3))):
        cfg, p = draw(sa.configs(max_window=256))
        adc_v, adc_i = draw(sa.listed_sequences(p, max_len=50))
        ops = textvec.samples(adc_v, adc_i)
        ops.insert(draw(st.integers(0, len(ops))), (draw(st.sampled_from("ri")),))
        out.append((p, ops))
    return out


@settings(max_examples=max(5, settings.default.max_examples // 4))
@given(_cases(), st.text(st.characters(codec="ascii", exclude_categories=["Cc"]), max_size=40))
def test_written_vectors_read_back_to_the_same_params_and_operations(cases, comment):
    text = textvec.dumps(cases, comment=comment)
    assert text.splitlines()[0 if not comment else 1] == textvec.HEADER
    assert textvec.loads(text) == cases


@settings(max_examples=max(5, settings.default.max_examples // 4))
@given(_cases())
def test_model_output_survives_formatting_and_parsing(cases):
    rows = textvec.model_output(cases)
    assert len(rows) == sum(len(ops) for _, ops in cases)
    assert textvec.parse_output(textvec.format_output(rows)) == rows


def test_output_line_with_a_missing_field_is_refused_with_its_line_number():
    good = " ".join(["0"] * len(textvec.OUTPUT_FIELDS))
    with pytest.raises(ValueError, match="output line 2"):
        textvec.parse_output(good + "\n" + good.rsplit(" ", 1)[0] + "\n")


def test_file_without_the_format_header_is_refused():
    with pytest.raises(ValueError, match="LDTV 1"):
        textvec.loads("p 1 2 3\n")
