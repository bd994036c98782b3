//! The session API the interactive session and the language server share.

use assort::check::diagnostic::Screen;
use assort::check::CheckOptions;
use assort::session::{Entered, Session};
use std::path::Path;

fn demo_folder_session() -> Session {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("recipes");
    Session::new(&dir.join("not-saved.assort"), CheckOptions::default())
}

#[test]
fn changing_k_does_not_read_the_data_again() {
    let mut s = demo_folder_session();
    for line in [
        "input \"data/coop_members.csv\" key member_id",
        "features visits_per_month, basket_value",
        "missing fill median",
        "kmeans k 3 restarts 2",
    ] {
        assert_eq!(s.enter(line, Screen::PLAIN).0, Entered::Added, "{line}");
    }
    s.run(Screen::PLAIN, false).unwrap();
    assert_eq!(
        s.enter("kmeans k 4 restarts 2", Screen::PLAIN).0,
        Entered::Replaced("kmeans".into())
    );
    assert_eq!(s.enter("scale robust", Screen::PLAIN).0, Entered::Added);
    s.run(Screen::PLAIN, false).unwrap();
    assert_eq!(s.last().unwrap().chosen, 4);
    assert_eq!(s.data_loads(), 1, "the file was read again");
    // Asking for another column reads it again.
    assert_eq!(
        s.enter(
            "features visits_per_month, basket_value, coupon_rate",
            Screen::PLAIN
        )
        .0,
        Entered::Replaced("features".into())
    );
    s.run(Screen::PLAIN, false).unwrap();
    assert_eq!(s.data_loads(), 2);
}

#[test]
fn a_statement_with_an_error_is_not_kept() {
    let mut s = demo_folder_session();
    s.enter(
        "input \"data/coop_members.csv\" key member_id",
        Screen::PLAIN,
    );
    let (what, problems) = s.enter("features visits_per_mnth", Screen::PLAIN);
    assert_eq!(what, Entered::Rejected);
    assert!(
        problems.contains("did you mean `visits_per_month`?"),
        "{problems}"
    );
    assert!(!s.text().contains("visits_per_mnth"));
}

#[test]
fn completion_knows_statements_options_and_columns() {
    let mut s = demo_folder_session();
    s.enter(
        "input \"data/coop_members.csv\" key member_id",
        Screen::PLAIN,
    );
    assert_eq!(s.complete("kme").labels(), ["kmeans", "kmedoids"]);
    assert_eq!(s.complete("kmea").labels(), ["kmeans"]);
    assert_eq!(s.complete("kmeans k 3 see").labels(), ["seeding"]);
    assert_eq!(
        s.complete("features visits_per_month, coup").labels(),
        ["coupon_rate"]
    );
    // On the demo's data: the key and the text column are not features.
    let offered = s.complete("features ");
    assert!(!offered.labels().contains(&"member_id"));
    assert!(!offered.labels().contains(&"home_branch"));
    assert_eq!(s.complete("categories ").labels(), ["home_branch"]);
    // Paths are relative to the recipe's folder.
    assert_eq!(
        s.complete("validate against \"data/coop_members_p")
            .labels(),
        ["data/coop_members_planted.csv"]
    );
}

#[test]
fn saving_keeps_the_authors_blank_lines_and_comments() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("kept.assort");
    let text = "input \"d.csv\" key id\n\n# what we cluster on\nfeatures a, b\n\nkmeans k 2  # two to start\n";
    std::fs::write(&path, text).unwrap();
    let mut session = Session::open(&path, CheckOptions::default()).unwrap();
    assert!(
        !session.unsaved(),
        "a session just opened has nothing to lose"
    );
    session.enter("seed 4", Screen::PLAIN);
    assert!(session.unsaved());
    session.save(&path).unwrap();
    assert!(!session.unsaved());
    assert_eq!(
        std::fs::read_to_string(&path).unwrap(),
        "input \"d.csv\" key id\n\n# what we cluster on\nfeatures a, b\n\nkmeans k 2  # two to start\nseed 4\n"
    );
}

#[test]
fn a_replaced_statement_keeps_the_blank_line_above_it_and_its_trailing_comment() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("kept.assort");
    let text = "input \"d.csv\" key id\nfeatures a, b\n\nkmeans k 2  # two to start\nscale none\n";
    std::fs::write(&path, text).unwrap();
    let mut session = Session::open(&path, CheckOptions::default()).unwrap();
    session.enter("kmeans k 3", Screen::PLAIN);
    // A comment of its own replaces the old one.
    session.enter("scale robust  # outliers in spend", Screen::PLAIN);
    session.save(&path).unwrap();
    assert_eq!(
        std::fs::read_to_string(&path).unwrap(),
        "input \"d.csv\" key id\nfeatures a, b\n\nkmeans k 3  # two to start\nscale robust  # outliers in spend\n"
    );
}

#[test]
fn a_warning_a_change_causes_elsewhere_is_shown_once() {
    let mut session = demo_folder_session();
    for s in [
        "input \"data/coop_members.csv\" key member_id",
        "features tenure_months, basket_value",
        "missing fill median",
        "kmeans k 2..4",
        "choose k by silhouette",
    ] {
        let (what, _) = session.enter(s, Screen::PLAIN);
        assert_ne!(what, Entered::Rejected, "{s}");
    }
    // One k left: the `choose` statement, not the one entered, is warned.
    let (_, shown) = session.enter("kmeans k 3", Screen::PLAIN);
    assert!(shown.contains("has nothing to choose from"), "{shown}");
    // Standing warnings are not repeated at every later entry.
    let (_, shown) = session.enter("seed 5", Screen::PLAIN);
    assert!(!shown.contains("has nothing to choose from"), "{shown}");
}

#[test]
fn a_label_is_changed_by_entering_it_again_and_any_statement_can_be_dropped() {
    let mut session = demo_folder_session();
    for s in [
        "input \"data/coop_members.csv\" key member_id",
        "features tenure_months, basket_value",
        "missing fill median",
        "transform basket_value log1p",
        "kmeans k 3",
        "label 3 \"night owls\"",
    ] {
        let (what, shown) = session.enter(s, Screen::PLAIN);
        assert_ne!(what, Entered::Rejected, "{s}: {shown}");
    }
    let (what, _) = session.enter("label 3 \"late shoppers\"", Screen::PLAIN);
    assert_eq!(what, Entered::Replaced("label 3 \"night owls\"".into()));
    assert!(session.text().contains("label 3 \"late shoppers\""));
    assert!(!session.text().contains("night owls"));

    assert_eq!(
        session.drop_statement("transform basket_value"),
        Ok("removed `transform basket_value log1p`".into())
    );
    assert!(!session.text().contains("transform"));
    assert!(session.drop_statement("label 9").is_err());
    // Undo puts a dropped statement back where it was.
    session.undo();
    assert!(session
        .text()
        .contains("missing fill median\ntransform basket_value log1p\nkmeans k 3"));
}

#[test]
fn a_weight_transform_or_missing_rule_for_the_same_columns_is_replaced_by_entering_it_again() {
    let mut session = demo_folder_session();
    for s in [
        "input \"data/coop_members.csv\" key member_id",
        "features tenure_months, basket_value, share_fresh",
        "missing fill median",
        "missing drop for share_fresh",
        "transform basket_value log1p",
        "weight tenure_months 2",
        "call basket_value \"spend\"",
        "kmeans k 3",
    ] {
        let (what, shown) = session.enter(s, Screen::PLAIN);
        assert_ne!(what, Entered::Rejected, "{s}: {shown}");
    }
    let replaced = [
        (
            "transform basket_value sqrt",
            "transform basket_value log1p",
        ),
        ("weight tenure_months 3", "weight tenure_months 2"),
        (
            "missing fill 0 for share_fresh",
            "missing drop for share_fresh",
        ),
        // The rule for every column is one statement too.
        ("missing fill mean", "missing fill median"),
        (
            "call basket_value \"basket\" as money",
            "call basket_value \"spend\"",
        ),
        // A statement naming more columns takes over the ones it covers.
        (
            "weight tenure_months, basket_value 0.5",
            "weight tenure_months 3",
        ),
    ];
    for (entered, old) in replaced {
        let (what, shown) = session.enter(entered, Screen::PLAIN);
        assert_eq!(what, Entered::Replaced(old.into()), "{entered}: {shown}");
        assert!(session.text().contains(entered), "{}", session.text());
        assert!(!session.text().contains(old), "{}", session.text());
    }
    // A statement that names only some of an earlier one's columns does not
    // silently take them over: the check refuses the overlap.
    let (what, shown) = session.enter("weight basket_value 4", Screen::PLAIN);
    assert_eq!(what, Entered::Rejected);
    assert!(shown.contains("given twice"), "{shown}");
    // Undo puts the replaced statement back.
    session.undo();
    assert!(session.text().contains("weight tenure_months 3"));
    assert!(!session
        .text()
        .contains("weight tenure_months, basket_value 0.5"));
    // A clip is a transform of its own: it goes beside the other one.
    let (what, shown) = session.enter("transform basket_value clip 0..0.99", Screen::PLAIN);
    assert_eq!(what, Entered::Added, "{shown}");
    assert!(session.text().contains("transform basket_value sqrt"));
    let (what, _) = session.enter("transform basket_value clip 0.01..0.99", Screen::PLAIN);
    assert_eq!(
        what,
        Entered::Replaced("transform basket_value clip 0..0.99".into())
    );
}

#[test]
fn a_statement_entered_again_word_for_word_changes_nothing() {
    // A paste recalled from the history enters every statement again: a
    // `tally` or a `save` already there is neither refused as a second use
    // of its columns nor counted as a second output to the same file.
    let mut s = demo_folder_session();
    for line in [
        "input \"data/coop_members.csv\" key member_id",
        "tally spend_12m",
        "save assignments \"out/a.csv\"",
        "features visits_per_month,\n         basket_value",
    ] {
        assert_ne!(s.enter(line, Screen::PLAIN).0, Entered::Rejected, "{line}");
    }
    let before = s.text();
    for line in [
        "tally spend_12m",
        "save  assignments \"out/a.csv\"   # again",
        "features visits_per_month, basket_value",
    ] {
        let (what, shown) = s.enter(line, Screen::PLAIN);
        assert_eq!(what, Entered::Unchanged, "{line}: {shown}");
        assert!(shown.is_empty(), "{line}: {shown}");
    }
    assert_eq!(s.text(), before);
}
