"""The usual cautions for a tool that raises a supply's output on purpose, and the voltage limits behind them."""

#: Extra-low-voltage limit for DC (SELV), V: about 60 V ripple-free DC (IEC 61140 band I,
#: from memory); low-voltage lighting and Class 2 circuits have lower limits.
ELV_DC_LIMIT_V = 60.0

CAUTIONS = (
    "linedrop raises the supply's output on purpose: always cap it with max_v, whatever the estimate.",
    "Compensation does not reduce cable heating: size the conductors for the current.",
    f"Respect extra-low-voltage limits (SELV about {ELV_DC_LIMIT_V:g} V DC; low-voltage lighting and "
    "Class 2 circuits are lower).",
    "These figures are simulations and sizing rules; defer to local codes and licensed practice.",
)
#: Added for lamp loads only.
LAMP_CAUTION = "Lamp life falls steeply with over-voltage."


def cautions_for(load_kind):
    """The usual cautions for a design or a run with a load of ``load_kind`` (list of str): the
    lamp line only where the load is a lamp. design, simulate (text and --json) and report.md
    all print this list."""
    out = list(CAUTIONS)
    if load_kind == "lamp":
        out.insert(-1, LAMP_CAUTION)
    return out


def voltage_cautions(max_load_v, max_supply_v):
    """Plain-language cautions for voltages that pass the extra-low-voltage limit (list of str)."""
    out = []
    if max_supply_v > ELV_DC_LIMIT_V:
        out.append(f"CAUTION: the supply output reaches {max_supply_v:.1f} V, above the "
                   f"{ELV_DC_LIMIT_V:g} V DC extra-low-voltage limit.")
    if max_load_v > ELV_DC_LIMIT_V:
        out.append(f"CAUTION: the load voltage reaches {max_load_v:.1f} V, above the "
                   f"{ELV_DC_LIMIT_V:g} V DC extra-low-voltage limit.")
    return out
