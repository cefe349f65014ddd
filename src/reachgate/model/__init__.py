"""What the user describes: rotations and transforms, robots, trajectories (lowest layer)."""
