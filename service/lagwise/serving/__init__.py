"""Running the service: the front, the gunicorn configuration and ``lagwise serve``'s launcher.

Importing this package loads nothing heavy (no Flask, no numpy): the front process
imports only it, h11 and :mod:`lagwise.configuration`.
"""
