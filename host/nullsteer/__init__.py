"""nullsteer: model, design and remotely switch the termination of a receiving loop."""

__version__ = "0.1.0"
