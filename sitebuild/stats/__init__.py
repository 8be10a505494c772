"""Pure statistical functions: arrays in, frozen result dataclasses out. No HTML, no files."""
