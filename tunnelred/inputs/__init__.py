"""Stage 1, inputs: units, campaign.toml, CSV logs and the campaign folder, read into SI."""
