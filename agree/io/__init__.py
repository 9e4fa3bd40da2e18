"""The one reading path: file loaders, layout detection and builders, codebooks, and every other list the commands read. Imports core."""
