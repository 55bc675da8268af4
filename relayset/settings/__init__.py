"""The setting rules: zone reaches, characteristics and checks under a philosophy."""
