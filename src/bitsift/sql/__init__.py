"""The SQL layer: dialect traits, the statement builder and every statement the package sends."""
