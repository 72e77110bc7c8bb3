"""What the receiver recorded, and its comparison with the plan."""
