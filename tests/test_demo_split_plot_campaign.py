"""The invented split-plot demo study goes with the invented campaign (README walkthrough step 4)."""

from levelwise import demo
from levelwise import demo_campaign as campaign


def test_split_plot_demo_uses_the_campaign_factors():
    by_name = {f.name: f for f in campaign.FACTORS}
    for f in demo.SPLIT_PLOT_FACTORS:
        ours = by_name[f.name]
        assert (f.low, f.high, f.units) == (ours.low, ours.high, ours.units)
    assert [f.name for f in demo.SPLIT_PLOT_FACTORS if f.hard_to_change] == ["Oven"]
    # The campaign's own stages reset the oven on every run: no factor of the campaign is hard to change.
    assert not any(f.hard_to_change for f in campaign.FACTORS)
    study = demo.split_plot_study()
    assert "invented" in study.title.lower() and "INVENTED" in study.notes
    assert study.has_whole_plots and study.hard_to_change == ["Oven"]
