"""Reports of stored work: lot statistics, pictures, pages and exports (a placeholder for the
package's own docstring, which helper "stats" writes)."""
