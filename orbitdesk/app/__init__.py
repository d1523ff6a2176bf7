"""Qt side: the window, its panels (panels/), plot helpers (plots/) and views (views/) over the headless document."""
