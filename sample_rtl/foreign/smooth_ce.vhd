-- smooth_ce: 3x3 Gaussian smoothing of an 8-bit luma raster that arrives behind a clock enable.
--
-- The pixel clock is a fraction of clk: the raster advances by one sample (active or blanking) on
-- every clk edge with pix_ce = '1', and only then. The result leaves with its own enable: pix_ce_o is
-- pix_ce delayed by one clk, and vs_o, hs_o, de_o and y_o change only on the clk after an enabled edge.
--
-- Formula: y_o(x, y) = (sum over the 3x3 window of w * p + 8) >> 4, w = [1 2 1; 2 4 2; 1 2 1];
-- pixels outside the frame take the value of the nearest edge pixel (replicate).
--
-- Structure: two delay lines of LINE_SAMPLES samples (one raster line, blanking included) give the
-- line above the centre and the centre line; the line below is the input itself. Every control of the
-- centre line (vs, hs, de) travels the first delay line with its pixel, so the output raster is the
-- input raster delayed by LINE_SAMPLES + 2 samples. LINE_SAMPLES must equal the timing's total samples
-- per line (h_total).
--
-- Latency: LINE_SAMPLES + 3 samples from taking input (0, 0) to the first output sample with
-- de_o = '1' (sampled on pix_ce_o).
--
-- Reset: rst, active high, synchronous to clk; clears the window and the output registers.
--
-- Seeded bugs (generics, 0 = off):
--   BUG_CE_BLANK   the delay lines also advance on clk edges without pix_ce while de_i is low.
--   BUG_LAT_CLOCKS the centre line's controls are aligned to the window by 4 clk edges (two
--                  samples at exactly one enable in two clocks) instead of 2 enabled samples.
library ieee;
use ieee.std_logic_1164.all;
use ieee.numeric_std.all;

entity smooth_ce is
    generic (
        LINE_SAMPLES   : positive := 40;
        BUG_CE_BLANK   : natural := 0;
        BUG_LAT_CLOCKS : natural := 0
    );
    port (
        clk      : in  std_logic;
        rst      : in  std_logic;
        pix_ce   : in  std_logic;
        vs_i     : in  std_logic;
        hs_i     : in  std_logic;
        de_i     : in  std_logic;
        y_i      : in  std_logic_vector(7 downto 0);
        pix_ce_o : out std_logic;
        vs_o     : out std_logic;
        hs_o     : out std_logic;
        de_o     : out std_logic;
        y_o      : out std_logic_vector(7 downto 0)
    );
end entity;

architecture rtl of smooth_ce is
    -- one raster sample as the delay lines keep it: vs, hs, de, luma
    subtype sample_t is std_logic_vector(10 downto 0);
    type line_t is array (0 to LINE_SAMPLES - 1) of sample_t;
    signal centre_line, upper_line : line_t := (others => (others => '0'));
    signal slot : natural range 0 to LINE_SAMPLES - 1 := 0;

    -- a window column: luma of the upper, centre and lower line with the border already resolved
    type column_t is record
        top, mid, bot : unsigned(7 downto 0);
        de            : std_logic;
    end record;
    constant NO_COLUMN : column_t := (top => (others => '0'), mid => (others => '0'), bot => (others => '0'), de => '0');
    signal left_col, centre_col, right_col : column_t := NO_COLUMN;
    signal ctl_a, ctl_b : std_logic_vector(2 downto 0) := (others => '0');  -- vs, hs, de of the centre line
    signal ctl_clk : std_logic_vector(11 downto 0) := (others => '0');       -- BUG_LAT_CLOCKS: 4 clk edges

    signal ce_q : std_logic := '0';
    signal vs_r, hs_r, de_r : std_logic := '0';
    signal y_r : std_logic_vector(7 downto 0) := (others => '0');

    function pick(here : unsigned(7 downto 0); near : unsigned(7 downto 0); inside : std_logic) return unsigned is
    begin
        if inside = '1' then
            return near;
        end if;
        return here;
    end function;

    function weigh(l, c, r : column_t) return unsigned is
        variable edge_l, edge_r : column_t;
        variable acc : unsigned(11 downto 0);
    begin
        edge_l := l;
        edge_r := r;
        if l.de /= '1' then edge_l := c; end if;
        if r.de /= '1' then edge_r := c; end if;
        acc := resize(edge_l.top, 12) + resize(edge_r.top, 12) + resize(edge_l.bot, 12) + resize(edge_r.bot, 12)
             + shift_left(resize(c.top, 12), 1) + shift_left(resize(c.bot, 12), 1)
             + shift_left(resize(edge_l.mid, 12), 1) + shift_left(resize(edge_r.mid, 12), 1)
             + shift_left(resize(c.mid, 12), 2) + 8;
        return acc(11 downto 4);
    end function;
begin
    process (clk)
        variable below, centre, upper : sample_t;
        variable step_line : boolean;
        variable fresh : column_t;
        variable ctl_now : std_logic_vector(2 downto 0);
    begin
        if rising_edge(clk) then
            ce_q <= pix_ce;
            step_line := pix_ce = '1' or (BUG_CE_BLANK /= 0 and de_i = '0');
            below := vs_i & hs_i & de_i & y_i;
            centre := centre_line(slot);
            upper := upper_line(slot);
            if rst = '1' then
                slot <= 0;
                left_col <= NO_COLUMN; centre_col <= NO_COLUMN; right_col <= NO_COLUMN;
                ctl_a <= (others => '0'); ctl_b <= (others => '0'); ctl_clk <= (others => '0');
                vs_r <= '0'; hs_r <= '0'; de_r <= '0'; y_r <= (others => '0');
            else
                if step_line then
                    centre_line(slot) <= below;
                    upper_line(slot) <= centre;
                    if slot = LINE_SAMPLES - 1 then
                        slot <= 0;
                    else
                        slot <= slot + 1;
                    end if;
                end if;
                ctl_clk <= ctl_clk(8 downto 0) & centre(10 downto 8);
                if pix_ce = '1' then
                    fresh.mid := unsigned(centre(7 downto 0));
                    fresh.top := pick(fresh.mid, unsigned(upper(7 downto 0)), upper(8));
                    fresh.bot := pick(fresh.mid, unsigned(below(7 downto 0)), below(8));
                    fresh.de := centre(8);
                    right_col <= fresh;
                    centre_col <= right_col;
                    left_col <= centre_col;
                    ctl_a <= centre(10 downto 8);
                    ctl_b <= ctl_a;
                    if BUG_LAT_CLOCKS /= 0 then
                        ctl_now := ctl_clk(11 downto 9);
                    else
                        ctl_now := ctl_b;
                    end if;
                    vs_r <= ctl_now(2);
                    hs_r <= ctl_now(1);
                    de_r <= ctl_now(0);
                    y_r <= std_logic_vector(weigh(left_col, centre_col, right_col));
                end if;
            end if;
        end if;
    end process;

    pix_ce_o <= ce_q;
    vs_o <= vs_r;
    hs_o <= hs_r;
    de_o <= de_r;
    y_o <= y_r;
end architecture;
