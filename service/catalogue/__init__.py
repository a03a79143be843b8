"""The lamp-type catalogue."""
