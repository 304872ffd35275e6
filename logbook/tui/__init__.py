"""The terminal interface: ``logbook`` with no command opens it (see app.py).

Screens present what the store holds and what the analysis computed; they compute
nothing themselves. Store access goes through ``gate.StoreGate`` (one lock), heavy
work (reading the fleet, forecasting, validating against the database) runs in
thread workers that hand results back as messages (``messages.py``).
``launch.py`` starts the app for the CLI: the fleet view's first frame needs only
Textual and ``layout.py``; the store, model and analysis are imported after it.
"""
