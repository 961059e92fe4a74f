"""require_tool: a missing system tool skips the test, or fails it under LINEDROP_REQUIRE_TOOLS=1."""
import pytest

from support import tools


def _missing(monkeypatch):
    monkeypatch.setattr(tools, "_probe", lambda name: f"{name} is not installed")


def test_missing_tool_skips_with_the_reason_by_default(monkeypatch):
    _missing(monkeypatch)
    monkeypatch.delenv("LINEDROP_REQUIRE_TOOLS", raising=False)
    with pytest.raises(pytest.skip.Exception, match="gcc-m32 is not installed"):
        tools.require_tool("gcc-m32")


def test_missing_tool_fails_when_tools_are_required(monkeypatch):
    _missing(monkeypatch)
    monkeypatch.setenv("LINEDROP_REQUIRE_TOOLS", "1")
    with pytest.raises(pytest.fail.Exception, match="LINEDROP_REQUIRE_TOOLS=1 but gcc-sanitizers"):
        tools.require_tool("gcc-sanitizers")


def test_available_tool_neither_skips_nor_fails(monkeypatch):
    monkeypatch.setattr(tools, "_probe", lambda name: None)
    monkeypatch.setenv("LINEDROP_REQUIRE_TOOLS", "1")
    tools.require_tool("gcc")


def test_unknown_tool_name_is_a_programming_error():
    with pytest.raises(ValueError, match="unknown tool"):
        tools._probe.__wrapped__("clang-tidy")
