"""The decision dossier: a self-contained, offline-verifiable record of one candidate.

``build`` (database-facing) gathers it, ``render`` writes the JSON, the HTML page with its plots
and the protocol files, and ``verify`` checks a dossier folder offline against a public key.
"""
