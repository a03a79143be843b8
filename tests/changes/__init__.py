"""Change feed tests."""
