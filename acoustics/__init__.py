"""Acoustic numerics: pitch arithmetic, tap-recording analysis and modal sound synthesis.

Pure functions on arrays; nothing here reads files, prints or imports the application layer.
"""
