"""Mining: the only package that runs git."""
