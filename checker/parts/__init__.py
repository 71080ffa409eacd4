"""The part library: built-in generic op-amp classes and user part files."""
