"""The pipeline stages: assess, occultations, rv, update, and their output envelope."""
