"""Checks on the shipped demo data in ``demo_texts/`` (the invented Lanternmoth survey).

The demo is invented data; these tests check that the files are what the demo
promises (issue 2, item 6; issue 5, "Done when") and use outside references
where a property can be checked against one: the CSV module and codecs of the
standard library, python-stdnum for IBAN checksums, libphonenumber
(``phonenumbers``) for phone numbers, rapidfuzz for near-duplicates,
``scipy.stats`` for G², and the spaCy lookup tables / simplemma for lemmas.
"""

import csv
import importlib.util
import io
import re
from pathlib import Path

import pandas as pd
import pytest

from workbench.core.settings import check_study, load_study

DEMO = Path(__file__).resolve().parents[1] / "demo_texts"
SURVEY = DEMO / "lanternmoth_passenger_survey.csv"
BATCH = DEMO / "lanternmoth_autumn_batch_cp1252.csv"
WORKBOOK = DEMO / "lanternmoth_passenger_survey.xlsx"
KEY = DEMO / "answer_key.csv"
GLOSSARY = DEMO / "glossary.csv"
COLUMNS = ["respondent_id", "country", "age_band", "wave", "interview_lang", "design_weight", "q_liked", "q_improve"]
MAIN_LANGUAGES = ["en", "de", "fr", "es", "it", "pl", "nl"]


def _generator():
    spec = importlib.util.spec_from_file_location("demo_make_demo", DEMO / "make_demo.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def survey() -> pd.DataFrame:
    return pd.read_csv(SURVEY, dtype=str, keep_default_na=False, encoding="utf-8")


@pytest.fixture(scope="module")
def key() -> pd.DataFrame:
    return pd.read_csv(KEY, dtype=str, keep_default_na=False, encoding="utf-8")


@pytest.fixture(scope="module")
def answers(survey: pd.DataFrame, key: pd.DataFrame) -> pd.DataFrame:
    """One row per non-empty answer: text, groups and the answer key's truth."""
    long = survey.melt(id_vars=COLUMNS[:6], value_vars=["q_liked", "q_improve"], var_name="question", value_name="text")
    long = long[long["text"] != ""]
    return long.merge(key, on=["respondent_id", "question"], how="left", validate="one_to_one")


def _tags(planted: str) -> set[str]:
    return set(filter(None, planted.split(";")))


# --------------------------------------------------------------------------- study files


@pytest.mark.parametrize("name", ["demo.study.toml", "demo_cp1252.study.toml", "demo_xlsx.study.toml"])
def test_study_files_validate(name: str) -> None:
    """Each shipped study passes ``check_study`` (the study-file contract) and names the real columns."""
    assert check_study(DEMO / name) == []
    study = load_study(DEMO / name)
    assert study.columns.text == ["q_liked", "q_improve"]
    assert study.columns.weight == "design_weight" and study.columns.language_hint == "interview_lang"
    assert study.compare.glossary == GLOSSARY.resolve()
    assert set(study.columns.groups) <= {"country", "age_band", "wave"}


def test_main_study_settings() -> None:
    """The main study covers the nine demo languages and all three group columns (issue 2, item 6)."""
    study = load_study(DEMO / "demo.study.toml")
    assert study.sources[0].path == SURVEY.resolve()
    assert sorted(study.languages.expected) == sorted(MAIN_LANGUAGES + ["pt", "sv"])
    assert study.columns.groups == ["country", "age_band", "wave"]
    assert study.columns.id == "respondent_id"


# --------------------------------------------------------------------------- the data files


def test_survey_csv_is_utf8_comma_lf(survey: pd.DataFrame) -> None:
    """UTF-8 (strict decode), LF only, comma-separated, the promised columns, >= 1,200 unique respondents."""
    raw = SURVEY.read_bytes()
    raw.decode("utf-8")
    assert b"\r" not in raw and not raw.startswith(b"\xef\xbb\xbf")
    header = next(csv.reader(io.StringIO(raw.decode("utf-8"))))
    assert header == COLUMNS
    assert len(survey) >= 1200
    assert survey["respondent_id"].is_unique
    weights = survey["design_weight"].astype(float)
    assert weights.between(0.3, 3.0).all() and abs(weights.mean() - 1.0) < 0.02 and weights.std() > 0.3
    assert set(survey["wave"]) == {"2025-spring", "2025-autumn"}
    assert set(survey["age_band"]) == {"18-29", "30-44", "45-59", "60+"}
    assert survey["country"].nunique() == 11
    # Some respondents answered only one question.
    assert ((survey["q_liked"] == "") ^ (survey["q_improve"] == "")).sum() > 50


def test_answer_key_covers_every_answer(answers: pd.DataFrame, key: pd.DataFrame) -> None:
    """The key has exactly one row per non-empty answer and >= 7 true languages besides 'und'."""
    assert len(key) == len(answers) and answers["true_language"].notna().all()
    languages = set(key["true_language"]) - {"und"}
    assert set(MAIN_LANGUAGES) <= languages and len(languages) >= 7
    counts = key["true_language"].value_counts()
    assert (counts[MAIN_LANGUAGES] >= 200).all() and counts["pt"] >= 30 and counts["sv"] >= 30


def test_planted_mess_is_present(answers: pd.DataFrame) -> None:
    """Every kind of mess the brief lists is planted, and the key's claims hold in the text."""
    tags = answers["planted"].map(_tags)
    count = {tag: int(tags.map(lambda t, tag=tag: tag in t).sum()) for tag in
             ("mislanguaged", "mixed", "non_answer", "duplicate", "near_duplicate", "pii", "mash",
              "emoji", "emoji_only", "html_entity", "typo", "mojibake")}
    assert all(n > 0 for n in count.values()), count
    share = count["mislanguaged"] / len(answers)
    assert 0.02 <= share <= 0.05
    mis = answers[tags.map(lambda t: "mislanguaged" in t)]
    assert (mis["true_language"] != mis["interview_lang"]).all()
    assert answers.loc[tags.map(lambda t: "html_entity" in t), "text"].str.contains(r"&(?:amp|quot|#39);").all()
    non_answers = set(answers.loc[tags.map(lambda t: "non_answer" in t), "text"].str.lower())
    assert {"nothing", "weiß nicht", "keine angabe", "nada", "rien", "nic", "niente", "geen idee", "-", "..."} <= non_answers


def test_personal_data_is_fictional(answers: pd.DataFrame) -> None:
    """E-mail domains are reserved ones (RFC 2606/6761); IBANs pass ISO 13616 mod-97 (python-stdnum
    ``stdnum.iban.is_valid``); each planted phone number is a possible number per libphonenumber
    (``phonenumbers.PhoneNumberMatcher`` with ``Leniency.POSSIBLE``)."""
    import phonenumbers
    from stdnum import iban

    text = "\n".join(answers["text"])
    emails = re.findall(r"[\w.+-]+@([\w-]+(?:\.[\w-]+)+)", text)
    assert emails and all(re.search(r"(^|\.)(example\.(org|net|com))$|\.invalid$", d) for d in emails)
    pii = answers[answers["planted"].map(lambda p: "pii" in _tags(p))]
    assert set(pii["detail"]) >= {"email", "phone_national", "phone_international", "iban"}
    for row in pii.itertuples():
        if row.detail == "iban":
            found = re.findall(r"\b[A-Z]{2}\d{2}(?: ?[A-Z0-9]{4}){3,7}(?: ?[A-Z0-9]{1,3})?\b", row.text)
            assert found and all(iban.is_valid(f) for f in found), row.text
        elif row.detail.startswith("phone"):
            region = {"AT": "DE", "BE": "FR"}.get(row.country, row.country)
            matches = list(phonenumbers.PhoneNumberMatcher(row.text, region, leniency=phonenumbers.Leniency.POSSIBLE))
            assert matches, row.text


def test_duplicates_are_the_planted_ones(answers: pd.DataFrame) -> None:
    """Among answers of 40+ characters, pairs with ``rapidfuzz.fuzz.ratio`` >= 92 (normalised Indel
    similarity) all involve a planted copy; planted copies equal their source, planted near-copies
    differ from it but score >= 92."""
    import numpy as np
    from rapidfuzz import fuzz, process

    ids = answers["respondent_id"] + "|" + answers["question"]
    by_id = dict(zip(ids, answers["text"]))
    # Input order of answers: row by row, q_liked before q_improve (workbench.core.corpus).
    order = {answer: (respondent, question == "q_improve") for answer, respondent, question
             in zip(ids, answers["respondent_id"], answers["question"])}
    for row in answers[answers["planted"].map(lambda p: bool({"duplicate", "near_duplicate"} & _tags(p)))].itertuples():
        source_id = row.detail.split(":", 1)[1]
        source = by_id[source_id]
        assert order[source_id] < order[f"{row.respondent_id}|{row.question}"]  # the copy comes later
        if "near_duplicate" in _tags(row.planted):
            assert row.text != source and fuzz.ratio(row.text, source) >= 92
        else:
            assert row.text == source
    long = answers[answers["text"].str.len() >= 40].reset_index(drop=True)
    scores = process.cdist(long["text"].tolist(), long["text"].tolist(), scorer=fuzz.ratio, score_cutoff=92)
    np.fill_diagonal(scores, 0)
    copies = long["planted"].map(lambda p: bool(_tags(p) & {"duplicate", "near_duplicate"})).to_numpy()
    pairs = np.argwhere(np.triu(scores) > 0)
    assert len(pairs) >= 20
    assert all(copies[i] or copies[j] for i, j in pairs)


def test_cp1252_batch(survey: pd.DataFrame) -> None:
    """The second export: decodes as cp1252 (not UTF-8), ';' separated, every line break CRLF,
    and it holds a part of the main survey's respondents."""
    raw = BATCH.read_bytes()
    with pytest.raises(UnicodeDecodeError):
        raw.decode("utf-8")
    text = raw.decode("cp1252")
    assert raw.count(b"\n") == raw.count(b"\r\n") > 250
    assert text.split("\r\n", 1)[0] == ";".join(COLUMNS)
    rows = list(csv.reader(io.StringIO(text, newline=""), delimiter=";"))
    assert all(len(r) == len(COLUMNS) for r in rows)
    batch = pd.DataFrame(rows[1:], columns=rows[0])
    assert 250 <= len(batch) < len(survey)
    assert set(batch["wave"]) == {"2025-autumn"} and set(batch["country"]) == {"DE", "FR", "NL"}
    main = survey.set_index("respondent_id").loc[batch["respondent_id"]]
    assert (main["design_weight"].to_numpy() == batch["design_weight"].to_numpy()).all()
    for column in ("q_liked", "q_improve"):
        original = main[column].str.replace("\n", "\r\n")
        same = original.to_numpy() == batch[column].to_numpy()
        encodable = original.map(lambda s: _encodes(s, "cp1252")).to_numpy()
        assert same[encodable].all()  # nothing changed that cp1252 can hold
        assert (~same).sum() >= 1  # and some emoji or Polish letters had to be transliterated


def _encodes(text: str, codec: str) -> bool:
    try:
        text.encode(codec)
    except UnicodeEncodeError:
        return False
    return True


def test_xlsx_matches_csv(survey: pd.DataFrame) -> None:
    """The spreadsheet copy holds the same cells as the CSV (read back with openpyxl)."""
    from openpyxl import load_workbook

    book = load_workbook(WORKBOOK, read_only=True)
    assert book.sheetnames[0] == "responses"
    rows = list(book["responses"].iter_rows(values_only=True))
    book.close()
    assert list(rows[0]) == COLUMNS and len(rows) - 1 == len(survey)
    for got, want in zip(rows[1:], survey.itertuples(index=False)):
        assert list(got[:5]) == list(want[:5])
        assert got[5] == pytest.approx(float(want[5]))
        assert [got[6] or "", got[7] or ""] == [want[6], want[7]]


def test_generator_is_deterministic(tmp_path: Path) -> None:
    """Regenerating into a fresh folder reproduces the committed CSV files byte for byte and the
    workbook cell for cell."""
    from openpyxl import load_workbook

    written = _generator().build(tmp_path)
    assert {p.name for p in written} == {SURVEY.name, BATCH.name, WORKBOOK.name, KEY.name}
    for name in (SURVEY.name, BATCH.name, KEY.name):
        assert (tmp_path / name).read_bytes() == (DEMO / name).read_bytes(), name
    new, old = load_workbook(tmp_path / WORKBOOK.name, read_only=True), load_workbook(WORKBOOK, read_only=True)
    assert new.sheetnames == old.sheetnames
    for sheet in old.sheetnames:
        assert list(new[sheet].values) == list(old[sheet].values)
    new.close()
    old.close()


def test_demo_folder_is_small() -> None:
    """The demo ships inside the wheel; keep it under 2 MB."""
    assert sum(p.stat().st_size for p in DEMO.iterdir() if p.is_file()) < 2_000_000


# --------------------------------------------------------------------------- planted findings

#: Words that carry each planted topic, in the nine languages (any inflection: stems).
TOPIC_WORDS = {
    "wifi": r"wi-?fi|wlan|socket|steckdose|prise|enchufe|\bprese?\b|gniazd|stopcontact|tomada|uttag|charg",
    "price": r"price|expensive|cheap|preis|teuer|günstig|billig|prix|cher|precio|caro|barat|prezz|econom|"
             r"\bcen[ayi]?\b|drog|tani|tańs|prijs|prijzen|duur|goedko|preço|pris|dyr",
    "delay": r"delay|\blate\b|verspätung|zu spät|retard|retraso|ritard|opóźni|spóźni|vertraging|te laat|atraso|försen",
    "breakfast": r"breakfast|frühstück|petit-déjeuner|desayuno|colazione|śniadani|ontbijt|pequeno-almoço|frukost",
    "access": r"ladder|steps|luggage|wheelchair|leiter|stufen|gepäck|rollst|échelle|marches|bagages|fauteuil|escal|"
              r"equipaje|sillas|scaletta|gradin|bagagl|sedie|drabink|stopnie|bagaż|wózk|trapje|treden|bagage|rolstoel|"
              r"degraus|escada|stegen|trappsteg",
    "staff": r"staff|conductor|attendant|personal|schaffner|zugbegleiter|personnel|contrôleur|accompagnateur|revisor|"
             r"auxiliar|capotreno|assistente|obsług|konduktor|steward|personeel|conducteur|pessoal|konduktör",
}


def _g2(answers: pd.DataFrame, question: str, topic: str, column: str, members: set[str]) -> tuple[float, float, float]:
    """Respondents mentioning the topic in the group and the rest; G² from
    ``scipy.stats.chi2_contingency(..., lambda_="log-likelihood", correction=False)`` (Dunning 1993)."""
    from scipy.stats import chi2_contingency

    sub = answers[answers["question"] == question]
    group = sub[column].isin(members)
    hit = sub["text"].str.lower().str.contains(TOPIC_WORDS[topic], regex=True)
    a, b = int((hit & group).sum()), int((hit & ~group).sum())
    n1, n2 = int(group.sum()), int((~group).sum())
    g2 = chi2_contingency([[a, n1 - a], [b, n2 - b]], lambda_="log-likelihood", correction=False)[0]
    return a / n1, b / n2, g2


@pytest.mark.parametrize(
    ("question", "topic", "column", "members"),
    [
        ("q_improve", "wifi", "age_band", {"18-29"}),
        ("q_improve", "price", "country", {"PL"}),
        ("q_improve", "price", "country", {"DE"}),
        ("q_improve", "delay", "wave", {"2025-spring"}),
        ("q_liked", "breakfast", "country", {"FR"}),
        ("q_improve", "access", "age_band", {"60+"}),
    ],
)
def test_planted_findings_show_in_the_text(answers: pd.DataFrame, question, topic, column, members) -> None:
    """Each planted group difference (README.md) is visible in the raw words, not only in the key:
    the group mentions the topic at least twice as often as the rest, with G² above 10.83, the
    critical value for p < 0.001 at one degree of freedom (``scipy.stats.chi2.isf(0.001, 1)``)."""
    from scipy.stats import chi2

    group, rest, g2 = _g2(answers, question, topic, column, members)
    assert group >= 2 * rest
    assert g2 > chi2.isf(0.001, 1)


def test_unplanted_topic_shows_no_difference(answers: pd.DataFrame) -> None:
    """Staff friendliness is planted equal in every country: FR vs the rest stays below the
    p < 0.05 critical value 3.84 (``scipy.stats.chi2.isf(0.05, 1)``)."""
    from scipy.stats import chi2

    assert _g2(answers, "q_liked", "staff", "country", {"FR"})[2] < chi2.isf(0.05, 1)


# --------------------------------------------------------------------------- glossary


def test_glossary_table() -> None:
    """concept,language,term; lowercase; no term in two concepts; languages of the study; >= 20 concepts."""
    glossary = pd.read_csv(GLOSSARY, dtype=str, keep_default_na=False)
    assert list(glossary.columns) == ["concept", "language", "term"]
    assert (glossary["term"] == glossary["term"].str.lower()).all() and (glossary["term"].str.strip() != "").all()
    assert not glossary.duplicated(["language", "term"]).any()
    assert set(glossary["language"]) <= set(load_study(DEMO / "demo.study.toml").languages.expected)
    assert glossary["concept"].nunique() >= 20
    per_concept = glossary.groupby("concept")["language"].nunique()
    assert (per_concept >= 7).all()


@pytest.mark.slow
def test_glossary_terms_are_the_lemmas_the_lookup_tables_give(answers: pd.DataFrame) -> None:
    """For the planted concepts, the glossary holds a term that the lemmatisers really produce from
    the demo answers: spaCy's lookup tables as shipped in spacy-lookups-data (en, de, fr; token as
    written, then lower-cased) and simplemma for Polish."""
    import simplemma
    import spacy_lookups_data
    import srsly

    glossary = pd.read_csv(GLOSSARY, dtype=str, keep_default_na=False)
    data = Path(spacy_lookups_data.__file__).parent / "data"
    for lang in ("en", "de", "fr", "pl"):
        words = re.findall(r"[^\W\d_]+(?:-[^\W\d_]+)*", " ".join(answers.loc[answers["true_language"] == lang, "text"]))
        if lang == "pl":
            lemmas = {simplemma.lemmatize(w, lang="pl").lower() for w in set(words)}
        else:
            table = srsly.read_gzip_json(data / f"{lang}_lemma_lookup.json.gz")
            lemmas = {_first(table.get(w) or table.get(w.lower()) or w).lower() for w in set(words)}
        for concept in ("price", "delay", "wifi", "breakfast", "socket"):
            terms = set(glossary.loc[(glossary["concept"] == concept) & (glossary["language"] == lang), "term"])
            assert terms & lemmas, (lang, concept)


def _first(value: str | list[str]) -> str:
    """Some tables (French) give a list of lemmas; the lemmatiser takes the first."""
    return value[0] if isinstance(value, list) else value
