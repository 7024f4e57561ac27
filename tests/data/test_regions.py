"""The US states' incomes shipped in libpysal's wheel, against the published facts of its files
(the README of libpysal's us_income example: 48 states, per-capita income 1929-2009, the GAL
contiguity weights) and the geography of the states (common practice, no source)."""

import pytest

from shiftbench.data.regions import shipped_folder, state_incomes
from shiftbench.data.splits import fold_split, resplit
from shiftbench.errors import ConfigError


def test_the_states_and_years_are_those_the_files_publish():
    dataset = state_incomes(window=3)
    # 81 years give 80 growth values; 3 of them a signal leave 77 forecasts of the next one.
    assert dataset.nodes == 48 and dataset.samples == 80 - 3
    assert dataset.signals.shape == (77, 48, 3) and dataset.labels.shape == (77, 48, 1)


def test_the_graph_has_the_gal_files_joins_and_alabama_borders_its_four_neighbours():
    import pandas as pd

    dataset = state_incomes()
    lines = (shipped_folder("us_income") / "states48.gal").read_text().split("\n")[1:]
    declared = sum(int(line.split()[1]) for line in lines[0::2] if line.strip())
    assert dataset.native_graph.edges == declared
    names = pd.read_csv(shipped_folder("us_income") / "usjoin.csv")["Name"].tolist()
    alabama = names.index("Alabama")
    sources = dataset.native_graph.edge_index[0][dataset.native_graph.edge_index[1] == alabama].tolist()
    assert {names[node] for node in sources} == {"Florida", "Georgia", "Mississippi", "Tennessee"}


def test_morans_i_of_the_1929_incomes_matches_esda_on_the_shipped_weights():
    # Reference: PySAL's esda.Moran with libpysal's reader of states48.gal, row-standardized.
    import esda
    import libpysal
    import pandas as pd

    from shiftbench.graph_check import morans_i, structure

    folder = shipped_folder("us_income")
    incomes = pd.read_csv(folder / "usjoin.csv")["1929"].to_numpy(dtype=float)
    weights = libpysal.io.open(str(folder / "states48.gal")).read()
    expected = esda.Moran(incomes, weights, transformation="r", permutations=0).I
    ours = morans_i(incomes[None], structure(state_incomes().native_graph))[0]
    assert ours == pytest.approx(expected, rel=1e-10)


def test_the_split_and_every_forward_chaining_fold_train_only_on_years_before_their_test_years():
    dataset = state_incomes()
    splits = [dataset.splits, *(fold_split(dataset, 4, fold).splits for fold in range(4))]
    for split in splits:
        assert split.train.max() < split.val.min() <= split.val.max() < split.test.min()
    tests = [split.test for split in splits[1:]]
    assert all(earlier.max() < later.min() for earlier, later in zip(tests, tests[1:]))


def test_a_random_resplit_of_years_in_order_is_refused():
    with pytest.raises(ConfigError, match="split=1 is not accepted for state_incomes, whose samples are in time order"):
        resplit(state_incomes(), 1)


def test_more_forward_chaining_folds_than_the_years_allow_are_refused():
    with pytest.raises(ConfigError, match="folds=60 is not accepted: state_incomes holds 77 times in order"):
        fold_split(state_incomes(), 60, 0)
