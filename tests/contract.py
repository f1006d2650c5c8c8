"""Result keys that other parts of the product (and users' scripts) rely on."""

# The JSON keys `phasewise inspect --json` must give (issue: period engine, item 9;
# suggestions and physics from the suggestions issue).
INSPECT_JSON_KEYS = frozenset(
    {
        "star_id", "n_points", "status", "period", "period_err", "fap", "candidates",
        "fourier", "mean_mag", "amplitude", "epoch_max", "secondary_periods",
        "period_ratio", "suggestions", "physics",
    }
)  # fmt: skip

# Further keys the ledger, the exports and the windows read.
RESULT_KEYS = INSPECT_JSON_KEYS | {
    "flags", "settings_hash", "time_scale", "bands", "primary_band", "mean_mag_by_band",
    "amplitude_by_band", "fourier_by_band",
    # the period choice on any cadence (issue 12): points set aside, trend,
    # modulation, the band of the relations' Fourier parameters and why
    "set_aside", "trend", "modulation", "relation_band", "relation_band_reason",
}  # fmt: skip
