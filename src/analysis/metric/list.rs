//! The list of evaluation metrics ([`METRICS`]): one entry per column of evaluations.csv, read by the summary,
//! summary.csv, the report and the charts (see the module's documentation for what each field does).

use super::*;

/// Every metric, in the order of summary.csv's final-figure columns and the report's summary table.
pub const METRICS: &[Metric] = &[
    Metric {
        column: "clean_success_rate",
        value: |r| r.success_rate,
        name: "clean success",
        head: "final clean success",
        better: Better::Higher,
        episodes: OverEpisodes::Proportion,
        last: Some(Final {
            key: "final_success",
            stream: 11,
            diverged: Some(0.0),
        }),
        curve: Some(CurveSpec {
            stream: 0,
            chart: CurveChart::Panel(Panel {
                title: "Clean success: reached, no contact (higher is better)",
                y_label: "clean success rate (fraction of eval episodes)",
                range: Some((0.0, 1.0)),
            }),
        }),
        yardstick: true,
        terminal: Some("clean success"),
        ranking: Some(("final clean success", "IQM [CI]")),
        ..Metric::ON_DISK
    },
    Metric {
        column: "reached_rate",
        value: |r| r.reached_rate,
        name: "reached",
        head: "reached",
        unit: "contact allowed",
        better: Better::Higher,
        episodes: OverEpisodes::Proportion,
        last: Some(Final {
            key: "final_reached",
            stream: 20,
            diverged: Some(0.0),
        }),
        curve: Some(CurveSpec {
            stream: 5,
            chart: CurveChart::Panel(Panel {
                title: "Reached the goal, contact allowed",
                y_label: "reached rate (fraction of eval episodes)",
                range: Some((0.0, 1.0)),
            }),
        }),
        ranking: Some(("reached", "contact allowed")),
        ..Metric::ON_DISK
    },
    Metric {
        column: "collision_rate",
        value: |r| r.collision_rate,
        name: "collision rate",
        head: "collision rate",
        better: Better::Lower,
        episodes: OverEpisodes::Proportion,
        last: Some(Final {
            key: "final_collision_rate",
            stream: 21,
            diverged: None,
        }),
        curve: Some(CurveSpec {
            stream: 6,
            chart: CurveChart::Panel(Panel {
                title: "Collision rate (lower is better)",
                y_label: "episodes with contact (fraction)",
                range: Some((0.0, 1.0)),
            }),
        }),
        yardstick: true,
        terminal: Some("collision rate"),
        ranking: Some(("collision rate", "episodes with contact")),
        ..Metric::ON_DISK
    },
    Metric {
        column: "episode_steps",
        value: |r| r.episode_steps,
        name: "episode length",
        head: "episode length",
        unit: "control steps",
        last: Some(Final {
            key: "episode_steps",
            stream: 22,
            diverged: None,
        }),
        // For the crash check (episodes shortened by contact).
        curve: Some(CurveSpec {
            stream: 7,
            chart: CurveChart::None,
        }),
        ..Metric::ON_DISK
    },
    Metric {
        column: "mean_return",
        value: |r| r.mean_return,
        name: "return",
        head: "final return",
        last: Some(Final {
            key: "final_return",
            stream: 12,
            diverged: None,
        }),
        curve: Some(CurveSpec {
            stream: 1,
            chart: CurveChart::Panel(Panel {
                title: "Mean return",
                y_label: "return per episode (reward units)",
                range: None,
            }),
        }),
        ..Metric::ON_DISK
    },
    Metric {
        column: "time_to_goal",
        value: |r| r.time_to_goal,
        name: "time to goal",
        head: "time to goal",
        unit: "s",
        better: Better::Lower,
        episodes: OverEpisodes::MeanOfReached,
        last: Some(Final {
            key: "time_to_goal_s",
            stream: 13,
            diverged: None,
        }),
        curve: Some(CurveSpec {
            stream: 2,
            chart: CurveChart::Panel(Panel {
                title: "Time to goal, episodes that reached it (lower is faster)",
                y_label: "time to goal (s)",
                range: None,
            }),
        }),
        yardstick: true,
        ..Metric::ON_DISK
    },
    Metric {
        column: "rms_joint_acc",
        value: |r| r.rms_joint_acc,
        name: "RMS joint acceleration",
        head: "RMS joint acc.",
        unit: "rad/s²",
        better: Better::Lower,
        last: Some(Final {
            key: "rms_joint_acc_rad_s2",
            stream: 14,
            diverged: None,
        }),
        curve: Some(CurveSpec {
            stream: 3,
            chart: CurveChart::Panel(Panel {
                title: "RMS joint acceleration (lower is smoother)",
                y_label: "RMS joint acceleration (rad/s²)",
                range: None,
            }),
        }),
        yardstick: true,
        ..Metric::ON_DISK
    },
    Metric {
        column: "peak_joint_acc",
        value: |r| r.peak_joint_acc,
        name: "peak joint acceleration",
        head: "peak joint acc.",
        unit: "rad/s²",
        better: Better::Lower,
        last: Some(Final {
            key: "peak_joint_acc_rad_s2",
            stream: 15,
            diverged: None,
        }),
        ..Metric::ON_DISK
    },
    Metric {
        column: "rms_jerk",
        value: |r| r.rms_jerk,
        name: "RMS jerk",
        head: "RMS jerk",
        unit: "rad/s³",
        better: Better::Lower,
        last: Some(Final {
            key: "rms_jerk_rad_s3",
            stream: 16,
            diverged: None,
        }),
        ..Metric::ON_DISK
    },
    Metric {
        column: "path_length",
        value: |r| r.path_length,
        name: "effector path length",
        head: "path length",
        unit: "m",
        last: Some(Final {
            key: "path_length_m",
            stream: 17,
            diverged: None,
        }),
        ..Metric::ON_DISK
    },
    Metric {
        column: "min_clearance",
        value: |r| r.min_clearance,
        name: "minimum clearance",
        head: "min clearance",
        unit: "m",
        better: Better::Higher,
        episodes: OverEpisodes::Min,
        last: Some(Final {
            key: "min_clearance_m",
            stream: 18,
            diverged: None,
        }),
        ..Metric::ON_DISK
    },
    Metric {
        column: "replans",
        value: |r| r.replans,
        name: "replans",
        head: "replans",
        unit: "per episode",
        last: Some(Final {
            key: "replans",
            stream: 19,
            diverged: None,
        }),
        ..Metric::ON_DISK
    },
    Metric {
        column: "path_deviation",
        value: |r| r.path_deviation,
        name: "distance to the reference path",
        unit: "m",
        better: Better::Lower,
        ..Metric::ON_DISK
    },
    Metric {
        column: "planner_fallbacks",
        value: |r| r.planner_fallbacks,
        name: "planner fallbacks",
        unit: "per episode",
        ..Metric::ON_DISK
    },
    Metric {
        column: "reference_collisions",
        value: |r| r.reference_collisions,
        name: "reference paths touching an obstacle",
        head: "waypoints in collision",
        unit: "fraction of an episode's reference paths",
        better: Better::Lower,
        last: Some(Final {
            key: "reference_collisions",
            stream: 23,
            diverged: None,
        }),
        ..Metric::ON_DISK
    },
    Metric {
        column: "curriculum_level",
        value: |r| r.curriculum_level,
        name: "curriculum difficulty",
        unit: "0-1",
        episodes: OverEpisodes::Training,
        curve: Some(CurveSpec {
            stream: 4,
            chart: CurveChart::Own(OwnChart {
                stem: "curriculum",
                caption: "Start-state difficulty over training for variants with a curriculum; a curve that stalls below 1 means the policy never mastered the full task distribution.",
                title: "How hard were the start states as training went on?",
                subtitle: "Curriculum difficulty (0 = easiest starts, 1 = full task); IQM across seeds with bootstrap CI band.",
                panel: Panel {
                    title: "Curriculum difficulty",
                    y_label: "difficulty (0-1)",
                    range: Some((0.0, 1.0)),
                },
                size: (1100, 620),
                variants: Shown::Curriculum,
            }),
        }),
        ..Metric::ON_DISK
    },
];
