//! Messages a user can act on: every kind of bad or doubtful input named
//! in the tracker gets one line that names the option or key, the value
//! and what would be valid, with the exit status the README promises (2
//! for bad input; 0 with a WARNING line where the run goes on). One table
//! of cases, run as a user runs the command.

mod common;

use std::path::{Path, PathBuf};

/// A scratch folder with the files the cases refer to.
fn scratch() -> PathBuf {
    let dir = std::env::temp_dir().join(format!("zvs-messages-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let demo = std::fs::read_to_string(common::root().join("tables/winch_aux.toml")).unwrap();
    let write = |name: &str, text: &str| std::fs::write(dir.join(name), text).unwrap();
    write(
        "winch_aux_coss.csv",
        &std::fs::read_to_string(common::root().join("tables/winch_aux_coss.csv")).unwrap(),
    );
    write("demo.toml", &demo);
    write(
        "boost.toml",
        "name = \"bst\"\ntopology = \"boost\"\nlr = \"1u\"\ncr = \"6.8n\"\nvin = [20, 40]\nio = [1, 4]\nvout = 48\n\
         [adc]\nbits = 12\nvin_volts_per_code = 0.0161\nio_amps_per_code = 0.00488\n\
         [timer]\nclock_hz = \"170M\"\ndriver_delay = \"25n\"\n",
    );
    write(
        "three.toml",
        &demo.replace("io = [1, 10]", "io = [0.5, 3, 5]"),
    );
    // A 10-16 V design whose ADC reads up to 20 V.
    write(
        "low.toml",
        &demo
            .replace("vin = [36, 60]", "vin = [10, 16]")
            .replace(
                "vin_volts_per_code = 0.0161",
                "vin_volts_per_code = 0.00489",
            )
            .replace("vout = 12", "vout = 5"),
    );
    // A design with 16-bit converters over the demo's range: 720 M pairs.
    write(
        "big.toml",
        &demo
            .replace("bits = 12", "bits = 16")
            .replace("vin_volts_per_code = 0.0161", "vin_volts_per_code = 0.001")
            .replace("io_amps_per_code = 0.00488", "io_amps_per_code = 0.0003"),
    );
    // A budget no table can meet: half a tick is rounding alone.
    write(
        "tiny_budget.toml",
        "name = \"tb\"\nlr = \"1u\"\ncr = \"6.8n\"\nvin = [12, 60]\nio = [0.3, 7]\nvout = 5\n\
         [adc]\nbits = 10\nvin_volts_per_code = 0.0644\nio_amps_per_code = 0.0195\n\
         [timer]\nclock_hz = \"170M\"\ndriver_delay = \"25n\"\n\
         [table]\nlayout = \"log-ratio\"\nmax_error_ticks = 0.5\n",
    );
    write("rising.csv", "0,1n\n20,2n\n10,3n\n");
    write("empty.csv", "# nothing here\n");
    write("one.csv", "10,1n\n");
    write("a_file", "");
    dir
}

struct Case {
    /// Arguments, split at spaces; `{root}` is the repository's root.
    args: &'static str,
    code: i32,
    /// Each must appear in standard error.
    says: &'static [&'static str],
    /// Each must appear in standard output.
    out: &'static [&'static str],
}

const CASES: &[Case] = &[
    Case {
        args: "fit demo.toml --capture {root}/tables/bringup/board_24V_5A.csv --capture {root}/tables/bringup/board_30V_7A.csv --vin 24 --vin 30 --vin 36 --io 5",
        code: 2,
        says: &["--vin is given 3 times for 2 captures", "same order"],
        out: &[],
    },
    Case {
        args: "fit demo.toml --capture {root}/tables/bringup/board_24V_5A.csv --vin 24 --io 5 --columns TIME",
        code: 2,
        says: &["--columns `TIME`", "time and switch voltage"],
        out: &[],
    },
    Case {
        args: "fit demo.toml --capture {root}/tables/bringup/board_24V_5A.csv --vin 24 --io 5 --columns TIME,CH3",
        code: 2,
        says: &["board_24V_5A.csv", "no column named `CH3`", "time, ch1"],
        out: &[],
    },
    Case {
        args: "fit demo.toml --capture nowhere.csv --vin 24 --io 5",
        code: 2,
        says: &["nowhere.csv", "cannot read"],
        out: &[],
    },
    Case {
        args: "fit demo.toml --capture {root}/tables/bringup/board_24V_5A.csv --vin 24 --io -5",
        code: 2,
        says: &["board_24V_5A.csv", "--io -5 A"],
        out: &[],
    },
    Case {
        args: "point --lr 1u --cr 6.8n --vin 48 --io 6 --lr-tol 200%",
        code: 2,
        says: &["--lr-tol", "200 %", "50 %"],
        out: &[],
    },
    Case {
        args: "netlist boost.toml --vin 100 --io 2",
        code: 2,
        says: &["--vin = 100 V", "below its output, vout = 48 V"],
        out: &[],
    },
    Case {
        args: "plot boost.toml --vin 100 --io 2 --out pics",
        code: 2,
        says: &["--vin = 100 V", "below its output"],
        out: &[],
    },
    Case {
        args: "size --vin 20:40 --io 1:4 --vds-rating 100 --topology boost",
        code: 2,
        says: &["--vout", "boost"],
        out: &[],
    },
    Case {
        args: "point --lr 1u --cr 1n --coss rising.csv --vin 48 --io 6",
        code: 2,
        says: &["rising.csv:3", "volts must increase", "10 V follows 20 V"],
        out: &[],
    },
    Case {
        args: "point --lr 1u --cr 1n --coss empty.csv --vin 48 --io 6",
        code: 2,
        says: &["empty.csv: no `volts,farads` points"],
        out: &[],
    },
    Case {
        args: "point --lr 1u --cr 1n --coss one.csv --vin 48 --io 6",
        code: 2,
        says: &["one.csv:1", "one point is a constant", "cr"],
        out: &[],
    },
    Case {
        args: "table demo.toml --out a_file",
        code: 2,
        says: &["--out a_file", "cannot create the folder"],
        out: &[],
    },
    Case {
        args: "netlist demo.toml --vin 48 --io 6 --out missing/cell.cir",
        code: 2,
        says: &["--out missing/cell.cir", "missing does not exist"],
        out: &[],
    },
    Case {
        args: "verify three.toml --method fixed-point",
        code: 2,
        says: &["io = [0.5, 3.0, 5.0]", "a range is two values"],
        out: &[],
    },
    Case {
        args: "verify demo.toml --method fixed-point --table winch_aux.bin",
        code: 2,
        says: &["--table winch_aux.bin", "--method fixed-point", "drop one"],
        out: &[],
    },
    Case {
        args: "netlist low.toml --vin 40 --io 6",
        code: 0,
        says: &["WARNING", "--vin = 40 V", "full scale of 20.0246 V"],
        out: &[],
    },
    Case {
        args: "netlist low.toml --vin 18 --io 6",
        code: 0,
        says: &["WARNING", "--vin = 18 V", "outside the design range 10 to 16 V"],
        out: &[],
    },
    Case {
        args: "netlist demo.toml --vin -3 --io 6",
        code: 2,
        says: &["--vin = -3 V", "above zero"],
        out: &[],
    },
    // The old spellings of renamed options are still accepted.
    Case {
        args: "point --lr 1u --cr 6.8n --vin 48 --io 6 --timer-hz 170M --tank-resistance 0.1 --vin-err 1% --io-err 2% --vin-offset 0.1 --io-offset 0.05",
        code: 0,
        says: &[],
        out: &[],
    },
    // Every command's short help carries the caution.
    Case {
        args: "point -h",
        code: 0,
        says: &[],
        out: &["CAUTION", "reduced voltage"],
    },
    // A passing verification ends with one plain line and the budget.
    Case {
        args: "verify demo.toml --table {root}/tables/winch_aux.bin",
        code: 0,
        says: &[],
        out: &["PASS: table within max_error_ticks = 1 (worst 0.999 ticks) at all 2749050 code pairs"],
    },
    // The deck's comments give times with their unit at a sensible precision.
    Case {
        args: "netlist demo.toml --vin 48 --io 6",
        code: 0,
        says: &[],
        out: &["gate off at 1.550 µs", "ZVS window 350.3 ns to 442.1 ns", "80.00 mΩ"],
    },
    // Work over a few minutes is refused with its estimate unless asked for.
    Case {
        args: "table big.toml --out big",
        code: 2,
        says: &["720030000 code pairs", "13 min", "--allow-long", "narrow the design range"],
        out: &[],
    },
    Case {
        args: "montecarlo demo.toml --table {root}/tables/winch_aux.bin --boards 1000000000",
        code: 2,
        says: &["1000000000 boards x 500 cycles", "--allow-long", "fewer boards"],
        out: &[],
    },
    // plot reads a table instead of generating one again.
    Case {
        args: "plot demo.toml --out pics --table {root}/tables/winch_aux.bin",
        code: 0,
        says: &[],
        out: &["wrote pics/error_map.svg"],
    },
    // No table meets the budget: the figure says where it was found, and
    // the advice names what helps.
    Case {
        args: "table tiny_budget.toml --out tb",
        code: 2,
        says: &[
            "max_error_ticks = 0.5",
            "the best (log-ratio) reached",
            "on a sample of the code pairs, so at least that",
            "widen max_error_ticks, narrow the design range, or allow another layout",
        ],
        out: &[],
    },
    // Advice in plain words, not a JSON key.
    Case {
        args: "point --lr 1u --cr 6.8n --vin 48 --io 6 --clock-hz 170M --lr-tol 10% --cr-tol 10% --position 0.02",
        code: 0,
        says: &[],
        out: &["WARNING: the nominal delay lies outside the robust window: command the robust delay, 70 ticks, instead"],
    },
    // table's help names every file it writes.
    Case {
        args: "table --help",
        code: 0,
        says: &[],
        out: &["<name>.h", "<name>.bin", "<name>_closed_form.rs", "CAUTION"],
    },
    // Monte Carlo says which gain and offset is whose.
    Case {
        args: "montecarlo demo.toml --table {root}/tables/winch_aux.bin --boards 3 --cycles 20",
        code: 0,
        says: &[],
        out: &["gain Vin ±1.0 % and Io ±2.0 %", "offset Vin ±3 and Io ±5 codes"],
    },
];

#[test]
fn every_bad_input_names_the_option_the_value_and_what_is_valid() {
    let dir = scratch();
    let mut failures = Vec::new();
    for case in CASES {
        let root = common::root().display().to_string();
        let args: Vec<String> = case
            .args
            .split(' ')
            .map(|a| a.replace("{root}", &root))
            .collect();
        let r = common::run(
            std::process::Command::new(env!("CARGO_BIN_EXE_zvs-timing"))
                .args(&args)
                .current_dir(&dir),
        );
        let missing: Vec<&&str> = case
            .says
            .iter()
            .filter(|s| !r.stderr.contains(**s))
            .chain(case.out.iter().filter(|s| !r.stdout.contains(**s)))
            .collect();
        if r.code != case.code || !missing.is_empty() {
            failures.push(format!(
                "`zvs-timing {}`: exit {} (want {}), missing {missing:?} in:\n{}\n{}",
                case.args, r.code, case.code, r.stderr, r.stdout
            ));
        }
        if case.code == 2 {
            // One line, no panic.
            let lines = r.stderr.lines().filter(|l| !l.trim().is_empty()).count();
            if lines != 1 || r.stderr.contains("panicked") {
                failures.push(format!(
                    "`zvs-timing {}`: not one line:\n{}",
                    case.args, r.stderr
                ));
            }
        }
    }
    let _ = std::fs::remove_dir_all(Path::new(&dir));
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}
