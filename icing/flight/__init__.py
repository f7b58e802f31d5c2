"""The flight: aircraft presets, routes and 4-D trajectories, atmosphere sources sampled along them, and the
per-segment assessment."""
