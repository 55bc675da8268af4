"""Report context and rendering: turns results objects into text, never computes physics."""
