"""Example files a user copies and adapts: test plans (``coil-plan.toml``); see ``README.md``."""
