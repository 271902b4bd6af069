//! The syntax tree of covey statements. Every node that a later error may
//! point at carries its [`Span`]: a byte range in the Markdown document.

/// A byte range in the Markdown document (not within the block).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct Span {
    pub start: usize,
    pub end: usize,
}

/// A value with the place it was written.
#[derive(Debug, Clone, PartialEq)]
pub struct Spanned<T> {
    pub value: T,
    pub span: Span,
}

/// One statement: what it asks for, where it stands and its text as written.
#[derive(Debug, Clone, PartialEq)]
pub struct Statement {
    pub kind: StatementKind,
    pub span: Span,
    /// 1-based line in the Markdown document.
    pub line: usize,
    /// The statement as written, without comment or surrounding blanks.
    pub text: String,
}

#[derive(Debug, Clone, PartialEq)]
pub enum StatementKind {
    Load {
        path: Spanned<String>,
        name: Option<Spanned<String>>,
        /// `sheet`, `table`, `query`, `separator` and `decimal`, as written.
        clauses: LoadClauses,
    },
    /// `load database NAME query "SQL" [as NAME]`: rows of a PostgreSQL query, the connection
    /// given on the command line (`--database NAME=URL`).
    LoadDatabase {
        /// The logical name of the database.
        database: Spanned<String>,
        query: Spanned<String>,
        name: Option<Spanned<String>>,
    },
    /// `compute NAME = EXPRESSION`: a new numeric column of the current data set.
    Compute {
        column: Spanned<String>,
        expr: Expr,
    },
    /// `label rows by COLUMN`: rows are named by this column in influence tables, previews
    /// and figure captions.
    LabelRows {
        column: Spanned<String>,
    },
    Missing {
        markers: Vec<String>,
    },
    Use {
        name: Spanned<String>,
    },
    Factor {
        column: Spanned<String>,
        levels: Option<Vec<Spanned<String>>>,
    },
    Keep {
        condition: Condition,
    },
    Show {
        name: Option<Spanned<String>>,
    },
    Model(ModelDecl),
    Table(TableRequest),
    /// `check M`: the assumption checks of a fitted model.
    Check {
        model: Spanned<String>,
        /// `alpha A`: the level the verdicts use (0.05 when absent).
        alpha: Option<Spanned<f64>>,
    },
    /// `plot KIND M [of X] [for F]`: a figure.
    Plot {
        kind: PlotKind,
        model: Spanned<String>,
        covariate: Option<Spanned<String>>,
        factor: Option<Spanned<String>>,
        /// `by B`: the second factor of an interaction figure.
        by: Option<Spanned<String>>,
    },
    /// `unit COLUMN "TEXT"`: the unit that axis labels show for a column.
    Unit {
        column: Spanned<String>,
        unit: Spanned<String>,
    },
    /// `param NAME = VALUE`: a parameter, the value in force (after any `--set`) and the
    /// document's default as written.
    Param {
        name: Spanned<String>,
        value: Literal,
        default: Literal,
    },
    /// `require ...`: a gate that fails the run when it does not hold.
    Require(Gate),
    /// `report M ...`: the conventional reporting sentence.
    Report(ReportRequest),
    /// `plan NAME for K groups ...`: power and sample size of the next trial.
    Plan(PlanDecl),
    /// `plot power PLAN [by f ... | by r2 ...] [to N]`: power against the number per group.
    PowerPlot {
        plan: Spanned<String>,
        lines: Option<PowerLines>,
        to: Option<Spanned<f64>>,
    },
}

/// The optional clauses of `load "FILE" ...`.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct LoadClauses {
    /// `sheet "NAME"` of a workbook.
    pub sheet: Option<Spanned<String>>,
    /// `table NAME` of a SQLite file.
    pub table: Option<Spanned<String>>,
    /// `query "SQL"` on a SQLite file.
    pub query: Option<Spanned<String>>,
    /// `separator ";"` (or `separator tab`) of delimited text: the separator as written.
    pub separator: Option<Spanned<String>>,
    /// `decimal ","` of delimited text.
    pub decimal: Option<Spanned<String>>,
}

impl LoadClauses {
    /// True when no clause is given.
    pub fn is_empty(&self) -> bool {
        *self == LoadClauses::default()
    }
}

/// An expression of `compute`, with the place of each part.
#[derive(Debug, Clone, PartialEq)]
pub struct Expr {
    pub kind: ExprKind,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub enum ExprKind {
    Number(f64),
    Column(String),
    /// A function of an expression, row by row.
    Call(Function, Box<Expr>),
    /// A summary of a whole column (its non-missing values in the current data set).
    Aggregate(Aggregate, Spanned<String>),
    Negate(Box<Expr>),
    Binary(BinaryOp, Box<Expr>, Box<Expr>),
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Function {
    Log,
    Log10,
    Exp,
    Sqrt,
    Abs,
}

impl Function {
    /// The name as written.
    pub fn name(self) -> &'static str {
        match self {
            Function::Log => "log",
            Function::Log10 => "log10",
            Function::Exp => "exp",
            Function::Sqrt => "sqrt",
            Function::Abs => "abs",
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Aggregate {
    Mean,
    Sd,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BinaryOp {
    Add,
    Subtract,
    Multiply,
    Divide,
    Power,
}

/// `plan NAME for K groups [in ratio R1:R2:...] [with C covariates [explaining R2]] effect
/// ... [alpha A] (power P | n N | n N power P) [from M [upper L]]`
#[derive(Debug, Clone, PartialEq)]
pub struct PlanDecl {
    pub name: Spanned<String>,
    /// K, as written (a whole number is checked when the plan runs).
    pub groups: Spanned<f64>,
    /// Relative group sizes, one per group.
    pub ratio: Option<Spanned<Vec<f64>>>,
    /// `with C covariates`: C, and R² when `explaining R2` follows.
    pub covariates: Option<Spanned<f64>>,
    pub r_squared: Option<Spanned<f64>>,
    pub effect: PlanEffect,
    pub alpha: Option<Spanned<f64>>,
    /// Given for a sample size, or with `n` for the detectable effect.
    pub power: Option<Spanned<f64>>,
    /// Given for the power, or with `power` for the detectable effect.
    pub n: Option<Spanned<f64>>,
    /// `from M`: the pilot model that gives the SD and R².
    pub pilot: Option<Spanned<String>>,
    /// `upper L`: plan with the one-sided upper L confidence limit of the pilot's SD.
    pub upper: Option<Spanned<f64>>,
}

/// The effect a plan is about.
#[derive(Debug, Clone, PartialEq)]
pub enum PlanEffect {
    /// `f F`: Cohen's f.
    F(Spanned<f64>),
    /// `means M1, M2, ... [sd S]`: the group means and the SD within groups without
    /// covariates.
    Means {
        means: Spanned<Vec<f64>>,
        sd: Option<Spanned<f64>>,
    },
    /// `detectable [sd S]`: the smallest effect the design detects.
    Detectable { sd: Option<Spanned<f64>> },
}

/// What the lines of a power figure differ in.
#[derive(Debug, Clone, PartialEq)]
pub enum PowerLines {
    /// `by f F1, F2, ...`
    Effects(Spanned<Vec<f64>>),
    /// `by r2 R1, R2, ...`
    RSquared(Spanned<Vec<f64>>),
}

/// A condition on computed results that must hold.
#[derive(Debug, Clone, PartialEq)]
pub enum Gate {
    /// `require equal slopes M for F [of X] [alpha A]`
    EqualSlopes {
        model: Spanned<String>,
        factor: Spanned<String>,
        covariate: Option<Spanned<String>>,
        alpha: Option<Spanned<f64>>,
    },
    /// `require normality M [alpha A]`
    Normality {
        model: Spanned<String>,
        alpha: Option<Spanned<f64>>,
    },
    /// `require N rows per F`
    RowsPerLevel {
        min: Spanned<f64>,
        factor: Spanned<String>,
    },
    /// `require balance X by F [in M] [alpha A]`: on the rows of model M when one is named.
    Balance {
        covariate: Spanned<String>,
        factor: Spanned<String>,
        model: Option<Spanned<String>>,
        alpha: Option<Spanned<f64>>,
    },
}

/// What a `report` sentence is about.
#[derive(Debug, Clone, PartialEq)]
pub enum ReportRequest {
    /// `report M term T [type 1|2|3]`
    Term {
        model: Spanned<String>,
        term: Spanned<String>,
        kind: SsKind,
    },
    /// `report M differences F between A and B [correction METHOD]`
    Difference {
        model: Spanned<String>,
        factor: Spanned<String>,
        first: Spanned<String>,
        second: Spanned<String>,
        correction: Option<Spanned<Correction>>,
    },
}

/// The figures of `plot`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PlotKind {
    /// The data with the fitted line of each level.
    Lines,
    /// Residuals against fitted values.
    Residuals,
    /// Normal quantile plot of standardized residuals.
    Quantiles,
    /// Adjusted means with confidence intervals.
    Means,
    /// Cook's distance by observation.
    Influence,
    /// The raw response by level.
    Groups,
    /// Adjusted cell means of two factors, one line per level of the second.
    Interaction,
}

/// A row filter of `keep where`.
#[derive(Debug, Clone, PartialEq)]
pub enum Condition {
    Compare {
        column: Spanned<String>,
        op: CompareOp,
        value: Spanned<Literal>,
    },
    In {
        column: Spanned<String>,
        values: Vec<Spanned<Literal>>,
    },
    Not(Box<Condition>),
    And(Vec<Condition>),
    Or(Vec<Condition>),
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CompareOp {
    Eq,
    Ne,
    Lt,
    Le,
    Gt,
    Ge,
}

/// A value written in a statement. A bare word and a quoted string are both
/// text; a number keeps the text it was written with, so that it can also
/// match a text cell or a factor level spelled the same way.
#[derive(Debug, Clone, PartialEq)]
pub enum Literal {
    Number(f64, String),
    Text(String),
}

impl Literal {
    /// The value as text, as the user wrote it.
    pub fn as_text(&self) -> &str {
        match self {
            Literal::Number(_, text) | Literal::Text(text) => text,
        }
    }
}

/// `model NAME: RESPONSE on TERM + TERM ... [without intercept]`
#[derive(Debug, Clone, PartialEq)]
pub struct ModelDecl {
    pub name: Spanned<String>,
    pub response: Spanned<String>,
    /// A transform of the response (`log(y)`), whose scale the results are on.
    pub response_transform: TransformDecl,
    pub terms: Vec<TermDecl>,
    pub intercept: bool,
    /// `weights W`: a numeric column of case weights (weighted least squares).
    pub weights: Option<Spanned<String>>,
}

/// A product of parts joined with `by`.
#[derive(Debug, Clone, PartialEq)]
pub struct TermDecl {
    pub parts: Vec<PartDecl>,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub struct PartDecl {
    pub column: Spanned<String>,
    pub transform: TransformDecl,
    pub span: Span,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TransformDecl {
    None,
    Power(u32),
    Log,
    Sqrt,
}

/// Which sums of squares an ANOVA table shows.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SsKind {
    Sequential,
    Partial,
    Marginal,
}

/// The correction for several comparisons made at once (`correction METHOD`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Correction {
    Tukey,
    Holm,
    Bonferroni,
    Sidak,
    /// Many-to-one against a control; only with `versus`.
    Dunnett,
    None,
}

/// Which side a comparison against a control is tested on.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Side {
    /// Two-sided.
    Both,
    /// Each level above the control (one-sided).
    Above,
    /// Each level below the control (one-sided).
    Below,
}

/// `versus LEVEL [above|below]`: every other level against this one.
#[derive(Debug, Clone, PartialEq)]
pub struct Versus {
    pub control: Spanned<String>,
    pub side: Side,
}

/// `at X = VALUE, ...`
#[derive(Debug, Clone, PartialEq)]
pub struct Setting {
    pub column: Spanned<String>,
    pub value: f64,
}

#[derive(Debug, Clone, PartialEq)]
pub enum TableRequest {
    Summary {
        column: Spanned<String>,
        by: Option<Spanned<String>>,
    },
    Fit {
        model: Spanned<String>,
    },
    Coefficients {
        model: Spanned<String>,
        level: Option<Spanned<f64>>,
        robust: bool,
    },
    Anova {
        model: Spanned<String>,
        kind: SsKind,
        robust: bool,
    },
    Compare {
        first: Spanned<String>,
        second: Spanned<String>,
    },
    /// `table means M for A [by B] [at ...] [level L] [robust]`
    Means {
        model: Spanned<String>,
        factor: Spanned<String>,
        by: Option<Spanned<String>>,
        at: Vec<Setting>,
        level: Option<Spanned<f64>>,
        robust: bool,
    },
    /// `table differences M for A [within B] [at ...] [correction C] [level L]
    /// [versus LEVEL [above|below]] [robust]`
    Differences {
        model: Spanned<String>,
        factor: Spanned<String>,
        within: Option<Spanned<String>>,
        at: Vec<Setting>,
        correction: Option<Spanned<Correction>>,
        level: Option<Spanned<f64>>,
        versus: Option<Versus>,
        robust: bool,
    },
    Slopes {
        model: Spanned<String>,
        covariate: Option<Spanned<String>>,
        factor: Spanned<String>,
        level: Option<Spanned<f64>>,
    },
    Contrast {
        model: Spanned<String>,
        factor: Spanned<String>,
        weights: Spanned<Vec<f64>>,
        at: Vec<Setting>,
        level: Option<Spanned<f64>>,
        robust: bool,
    },
    Regions {
        model: Spanned<String>,
        covariate: Spanned<String>,
        factor: Spanned<String>,
        between: Option<(Spanned<String>, Spanned<String>)>,
        alpha: Option<Spanned<f64>>,
    },
}

impl TableRequest {
    /// The model a table request is about (the first one for `compare`);
    /// empty for `summary`, which is about a column of the data.
    pub fn model_name(&self) -> &str {
        match self {
            TableRequest::Summary { .. } => "",
            TableRequest::Fit { model }
            | TableRequest::Coefficients { model, .. }
            | TableRequest::Anova { model, .. }
            | TableRequest::Means { model, .. }
            | TableRequest::Differences { model, .. }
            | TableRequest::Slopes { model, .. }
            | TableRequest::Contrast { model, .. }
            | TableRequest::Regions { model, .. } => &model.value,
            TableRequest::Compare { first, .. } => &first.value,
        }
    }
}
