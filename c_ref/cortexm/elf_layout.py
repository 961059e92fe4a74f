"""Struct layouts of a target image from its DWARF, and packing to and from the target's bytes.

Lets host tools exchange ``ld_params_t`` and ``ld_state_t`` with an emulated
or real target without a hand-kept field list: the compiler's own layout
(offsets, widths, signedness, array lengths) is read from the ELF.
"""
import struct

from elftools.elf.elffile import ELFFile

_INT_FORMATS = {(1, False): "B", (1, True): "b", (2, False): "H", (2, True): "h",
                (4, False): "I", (4, True): "i"}


def _base_type(die):
    while die.tag in ("DW_TAG_typedef", "DW_TAG_const_type", "DW_TAG_volatile_type"):
        die = die.get_DIE_from_attribute("DW_AT_type")
    return die


def struct_layout(elf, typedef_name):
    """Layout of a C struct typedef: ``(size, {field: (offset, struct-format, count)})``.

    ``elf`` is an open :class:`ELFFile` or a path.
    """
    if isinstance(elf, str):
        with open(elf, "rb") as f:
            return struct_layout(ELFFile(f), typedef_name)
    for cu in elf.get_dwarf_info().iter_CUs():
        for die in cu.iter_DIEs():
            name = die.attributes.get("DW_AT_name")
            if die.tag != "DW_TAG_typedef" or name is None or name.value.decode() != typedef_name:
                continue
            st = _base_type(die)
            fields = {}
            for m in st.iter_children():
                if m.tag != "DW_TAG_member":
                    continue
                t = _base_type(m.get_DIE_from_attribute("DW_AT_type"))
                count = 1
                if t.tag == "DW_TAG_array_type":
                    sub = next(t.iter_children())
                    count = sub.attributes["DW_AT_upper_bound"].value + 1
                    t = _base_type(t.get_DIE_from_attribute("DW_AT_type"))
                signed = t.attributes["DW_AT_encoding"].value in (5, 6)  # DW_ATE_signed(_char)
                fmt = _INT_FORMATS[(t.attributes["DW_AT_byte_size"].value, signed)]
                fields[m.attributes["DW_AT_name"].value.decode()] = (
                    m.attributes["DW_AT_data_member_location"].value, fmt, count)
            return st.attributes["DW_AT_byte_size"].value, fields
    raise KeyError(f"{typedef_name} not found in the DWARF of the image (build with -g)")


def pack(layout, values):
    """Bytes of a struct from ``{field: int or sequence}``; fields not given are zero."""
    size, fields = layout
    buf = bytearray(size)
    for name, (off, fmt, count) in fields.items():
        v = values.get(name, 0)
        v = list(v) if count > 1 else [v]
        struct.pack_into(f"<{count}{fmt}", buf, off, *v)
    return bytes(buf)


def unpack(layout, data):
    """``{field: int}`` from a struct's bytes (array fields as tuples)."""
    _, fields = layout
    out = {}
    for name, (off, fmt, count) in fields.items():
        v = struct.unpack_from(f"<{count}{fmt}", data, off)
        out[name] = v if count > 1 else v[0]
    return out
