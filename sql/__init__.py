"""The SQL macros of tidesplit (tidesplit.sql), shipped as package data."""
