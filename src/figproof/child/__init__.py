"""Code that runs inside the child process, next to the user's script: the only package that imports pyplot."""
