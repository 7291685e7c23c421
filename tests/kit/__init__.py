"""What the tests share that is not a fixture: the invented plants, the app driver, the
CSV oracle, the crash writer, file damage. No tests here."""
