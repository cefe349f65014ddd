"""Chain forward kinematics and Jacobians, closed-form and numeric IK, whole-path IK."""
