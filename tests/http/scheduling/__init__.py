"""Weekly runs over HTTP."""
