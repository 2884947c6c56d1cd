"""One module per command; each exposes a Click command or group named ``command``."""
