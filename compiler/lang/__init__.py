"""The test-language front end: parse `.loom` programs, check them, build the IR."""
