"""The measurement methods: from readings and settings to frozen results with ``to_dict()``."""
