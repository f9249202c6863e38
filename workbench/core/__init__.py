"""The pure pipeline: settings, ingest, clean, identify, terms, weigh, compare, export.

Nothing in this package prints, exits, or imports the terminal UI.
"""
