//! `zvs-timing size`: the tank's Z0 interval and Lr/Cr pairs.

use clap::Args;
use host_tool::analysis::point::InputError;

use crate::args::{num, opt_num, range, topology, TopologyArg};

/// Ranges are `LOW:HIGH` or, as in a design file, `[LOW, HIGH]`; numbers take SI or engineering
/// prefixes as in `point`.
#[derive(Args)]
pub(crate) struct SizeArgs {
    /// Input-voltage range, volt, e.g. 36:60.
    #[arg(long, allow_hyphen_values = true)]
    vin: String,
    /// Output-current range that must switch softly, ampere, e.g. 1:8.
    #[arg(long, allow_hyphen_values = true)]
    io: String,
    /// MOSFET drain-source voltage rating, volt.
    #[arg(long, allow_hyphen_values = true)]
    vds_rating: String,
    /// Fraction of the rating the peak switch voltage may use.
    #[arg(long, default_value = "0.8", allow_hyphen_values = true)]
    derating: String,
    /// Converter the switch sits in.
    #[arg(long, value_enum, default_value = "buck")]
    topology: TopologyArg,
    /// Output voltage, volt (boost and buck-boost need it; for the buck it gives the
    /// switching-frequency range that regulates).
    #[arg(long, allow_hyphen_values = true)]
    vout: Option<String>,
    /// Resonant frequency f0 for the Lr/Cr pairs, hertz.
    #[arg(long, allow_hyphen_values = true)]
    f0: Option<String>,
    /// Highest switching frequency allowed, hertz: picks f0 when --f0 is not given (buck
    /// with --vout), else is checked.
    #[arg(long, allow_hyphen_values = true)]
    fs_max: Option<String>,
    /// Print one JSON object instead of the summary.
    #[arg(long)]
    json: bool,
}

impl SizeArgs {
    fn to_input(&self) -> Result<host_tool::analysis::size::SizeInput, InputError> {
        Ok(host_tool::analysis::size::SizeInput {
            topology: topology(self.topology),
            vin_v: range("--vin", &self.vin, "V")?,
            io_a: range("--io", &self.io, "A")?,
            vout_v: opt_num("--vout", self.vout.as_ref(), "V")?,
            vds_rating_v: num("--vds-rating", &self.vds_rating, "V")?,
            derating: num("--derating", &self.derating, "")?,
            f0_hz: opt_num("--f0", self.f0.as_ref(), "Hz")?,
            fs_max_hz: opt_num("--fs-max", self.fs_max.as_ref(), "Hz")?,
        })
    }
}

pub(crate) fn run_size(args: &SizeArgs) -> anyhow::Result<()> {
    let input = args.to_input()?;
    let report = host_tool::analysis::size::size(&input)?;
    if args.json {
        let mut j = serde_json::to_value(&report)?;
        if let Some(o) = j.as_object_mut() {
            o.insert(
                "caution".to_owned(),
                serde_json::Value::String(host_tool::analysis::point::CAUTION.to_owned()),
            );
        }
        outln!("{}", serde_json::to_string_pretty(&j)?);
    } else {
        out!("{}", host_tool::report::render::size_text(&report));
    }
    Ok(())
}
