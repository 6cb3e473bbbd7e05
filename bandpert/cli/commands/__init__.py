"""The commands: each parses its options, calls the library, prints and writes."""
