"""The edge: tables, JSON and CSV, pictures, descriptions and progress for the terminal."""
