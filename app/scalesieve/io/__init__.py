"""Readers and writers; every input problem becomes a ScalesieveError."""
