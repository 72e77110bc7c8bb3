"""The search space of one acquisition: Doppler windows, frequency bins, code windows and
detection statistics."""
