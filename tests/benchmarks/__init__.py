"""Every benchmark script runs in quick mode, so none of them rots."""
