"""Over many scenes: season totals, per-zone depths and volumes, comparisons of periods."""
