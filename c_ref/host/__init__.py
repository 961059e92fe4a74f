"""Host-only compiled closed loop (plant, converters and ld_step); not part of the firmware reference."""
