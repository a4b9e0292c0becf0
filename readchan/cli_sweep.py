"""`readchan sweep`: margin sweeps over one impairment (registered on the main app)."""
