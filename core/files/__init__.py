"""Text in and out at the edge: scenario files, plan exports, atomic writes, the demo."""
