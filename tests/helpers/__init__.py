"""Small helpers shared by the test modules (not tests themselves)."""
