"""Shared set-up for monitor.estimate tests: figures on the Agg backend, never on screen."""

import matplotlib

matplotlib.use("Agg")
