-- edge_core (VHDL-2008): Sobel gradient magnitude of the luma of an RGB video stream (video family).
-- The same ports, behaviour and latency as edge_core.v + window3x3.v; analyse
-- edge_root_table_pkg.vhd first (it holds the root table as a constant).
--
-- Interface: clk, rst (active high, synchronous), in_vsync, in_hsync, in_de, in_valid,
-- in_data(23 downto 0) (R = 23:16, G = 15:8, B = 7:0), out_vsync, out_hsync, out_de, out_valid,
-- out_data(7 downto 0). Syncs active high; in_valid low inside in_de is a stall. The line width W is
-- learned from the valid pixels of each in_de run (up to MAX_WIDTH). Output line y leaves while
-- input line y+1 arrives: the centre (x-1, y-1) when input (x, y) is taken, the centre (W-1, y-1) on
-- the first clock after in_de falls; the last line is flushed at the leading edge of in_vsync at one
-- pixel per clock, and out_vsync is held low until that flush has left.
--
-- Latency: 8 clocks from taking input pixel (x, y) to out_valid for output pixel (x-1, y-1)
-- (1 luma + 3 window + 1 gradient + 1 square + 1 address + 1 table read).
--
-- Exact integer formulas (p(row, col) is the 3x3 window of luma12, row 0 = line above):
--   luma12 = (77*R + 150*G + 29*B + 8) >> 4                                      0..4080
--   gx = (p(0,2) + 2*p(1,2) + p(2,2)) - (p(0,0) + 2*p(1,0) + p(2,0))             -16320..16320
--   gy = (p(2,0) + 2*p(2,1) + p(2,2)) - (p(0,0) + 2*p(0,1) + p(0,2))             15 bits signed
--   s  = gx*gx + gy*gy                                          0..532,684,800, 29 bits unsigned
--   a  = min(s >> 12, 8191)                                                      13 bits
--   out = ROOT_TABLE(a) = isqrt(8*a)                                             0..255
-- Border (BORDER generic, as scipy.ndimage modes): 0 replicate ('nearest', default), 1 zero
-- ('constant'), 2 mirror ('mirror').

library ieee;
use ieee.std_logic_1164.all;
use ieee.numeric_std.all;
use work.edge_root_table_pkg.all;

entity edge_core is
    generic (
        MAX_WIDTH : positive := 1024;
        BORDER    : natural range 0 to 2 := 0
    );
    port (
        clk       : in  std_logic;
        rst       : in  std_logic;
        in_vsync  : in  std_logic;
        in_hsync  : in  std_logic;
        in_de     : in  std_logic;
        in_valid  : in  std_logic;
        in_data   : in  std_logic_vector(23 downto 0);
        out_vsync : out std_logic;
        out_hsync : out std_logic;
        out_de    : out std_logic;
        out_valid : out std_logic;
        out_data  : out std_logic_vector(7 downto 0)
    );
end entity edge_core;

architecture rtl of edge_core is

    function clog2(value : positive) return positive is
        variable v : natural := value - 1;
        variable r : natural := 0;
    begin
        while v > 0 loop
            r := r + 1;
            v := v / 2;
        end loop;
        if r < 1 then
            r := 1;
        end if;
        return r;
    end function;

    constant AW : positive := clog2(MAX_WIDTH);
    subtype addr_t is unsigned(AW - 1 downto 0);
    constant A0 : addr_t := (others => '0');
    constant A1 : addr_t := to_unsigned(1, AW);

    subtype pix_t is unsigned(11 downto 0);
    constant P0 : pix_t := (others => '0');
    type ram_t is array (0 to MAX_WIDTH - 1) of pix_t;
    type col_t is array (0 to 2) of pix_t;       -- 0 = top, 1 = mid, 2 = bot
    type win_t is array (0 to 8) of pix_t;       -- index 3*row + col
    constant COL0 : col_t := (others => P0);

    -- luma stage
    signal luma                        : pix_t := P0;
    signal l_vs, l_hs, l_de, l_valid   : std_logic := '0';
    -- window stage 0 state
    signal de_q, vs_q                  : std_logic := '0';
    signal x_cnt, width, fl_x          : addr_t := A0;
    signal line_cnt, fl_phase          : unsigned(1 downto 0) := "00";
    signal fl_first_row                : std_logic := '0';
    -- line buffers (power-up zero, as in the Verilog)
    signal lb1, lb2                    : ram_t := (others => P0);
    signal lb1_q, lb2_q                : pix_t := P0;
    -- window stage 1
    signal s1_px, s1_end, s1_take, s1_emit, s1_first_row, s1_last_row, s1_first_col : std_logic := '0';
    signal s1_vs, s1_hs                : std_logic := '0';
    signal s1_addr                     : addr_t := A0;
    signal s1_pix                      : pix_t := P0;
    -- window stage 2
    signal w_c0, w_c1, w_c2            : col_t := COL0;
    signal s2_emit, s2_first_row, s2_last_row, s2_first_col, s2_last_col : std_logic := '0';
    signal s2_vs, s2_hs, run2          : std_logic := '0';
    -- window outputs
    signal win                         : win_t := (others => P0);
    signal w_vs, w_hs, w_de, w_valid   : std_logic := '0';
    -- datapath
    signal gx, gy                      : signed(14 downto 0) := (others => '0');
    signal sum_sq                      : unsigned(28 downto 0) := (others => '0');
    signal addr                        : unsigned(12 downto 0) := (others => '0');
    signal dout                        : unsigned(7 downto 0) := (others => '0');
    signal d_vs, d_hs, d_de, d_valid   : std_logic_vector(3 downto 0) := (others => '0');

begin

    process (clk)
        variable r, g, b                 : unsigned(15 downto 0);
        variable luma_sum                : unsigned(15 downto 0);
        variable take0, eol0, vs_edge0, fl_start0, fl_px0, fl_end0 : boolean;
        variable px0, end0, emit0, end_w1, first_col0 : boolean;
        variable addr0                   : addr_t;
        variable col_top, col_bot        : pix_t;
        variable left, right             : col_t;
        variable gx_pos, gx_neg, gy_pos, gy_neg : unsigned(14 downto 0);
        variable gx2, gy2                : signed(29 downto 0);
        variable s_next                  : unsigned(28 downto 0);
    begin
        if rising_edge(clk) then
            ---------------------------------------------------------------- luma (1 clock)
            r := resize(unsigned(in_data(23 downto 16)), 16);
            g := resize(unsigned(in_data(15 downto 8)), 16);
            b := resize(unsigned(in_data(7 downto 0)), 16);
            luma_sum := resize(77 * r + 150 * g + 29 * b + 8, 16);

            ---------------------------------------------------------------- window stage 0
            take0 := l_de = '1' and l_valid = '1';
            eol0 := de_q = '1' and l_de = '0' and x_cnt /= A0;
            vs_edge0 := l_vs = '1' and vs_q = '0';
            fl_start0 := vs_edge0 and line_cnt /= 0 and fl_phase = 0;
            fl_px0 := fl_start0 or fl_phase = 1;
            fl_end0 := fl_phase = 2;
            if take0 then
                addr0 := x_cnt;
            elsif fl_start0 then
                addr0 := A0;
            else
                addr0 := fl_x;
            end if;
            px0 := take0 or fl_px0;
            end0 := eol0 or fl_end0;
            emit0 := ((px0 and addr0 /= A0) or end0) and (line_cnt /= 0 or fl_px0 or fl_end0);
            if eol0 then
                end_w1 := x_cnt = A1;
            else
                end_w1 := width = A1;
            end if;
            first_col0 := (px0 and addr0 = A1) or (end0 and end_w1);

            ---------------------------------------------------------------- line buffers
            if px0 then
                lb1_q <= lb1(to_integer(addr0));
                lb2_q <= lb2(to_integer(addr0));
            end if;
            if s1_take = '1' then
                lb1(to_integer(s1_addr)) <= s1_pix;
                lb2(to_integer(s1_addr)) <= lb1_q;
            end if;

            ---------------------------------------------------------------- stage 1: row border
            col_bot := s1_pix;
            if s1_last_row = '1' then
                if BORDER = 1 then
                    col_bot := P0;
                elsif BORDER = 2 and s1_first_row = '0' then
                    col_bot := lb2_q;
                else
                    col_bot := lb1_q;
                end if;
            end if;
            col_top := lb2_q;
            if s1_first_row = '1' then
                if BORDER = 1 then
                    col_top := P0;
                elsif BORDER = 2 and s1_last_row = '0' then
                    col_top := s1_pix;
                else
                    col_top := lb1_q;
                end if;
            end if;

            ---------------------------------------------------------------- stage 2: column border
            left := w_c0;
            if s2_first_col = '1' then
                if BORDER = 1 then
                    left := COL0;
                elsif BORDER = 2 and s2_last_col = '0' then
                    left := w_c2;
                else
                    left := w_c1;
                end if;
            end if;
            right := w_c2;
            if s2_last_col = '1' then
                if BORDER = 1 then
                    right := COL0;
                elsif BORDER = 2 and s2_first_col = '0' then
                    right := w_c0;
                else
                    right := w_c1;
                end if;
            end if;

            ---------------------------------------------------------------- gradient, square, address
            gx_pos := resize(win(2), 15) + shift_left(resize(win(5), 15), 1) + resize(win(8), 15);
            gx_neg := resize(win(0), 15) + shift_left(resize(win(3), 15), 1) + resize(win(6), 15);
            gy_pos := resize(win(6), 15) + shift_left(resize(win(7), 15), 1) + resize(win(8), 15);
            gy_neg := resize(win(0), 15) + shift_left(resize(win(1), 15), 1) + resize(win(2), 15);
            gx2 := gx * gx;
            gy2 := gy * gy;
            s_next := unsigned(gx2(28 downto 0)) + unsigned(gy2(28 downto 0));

            if rst = '1' then
                luma <= P0;
                l_vs <= '0';
                l_hs <= '0';
                l_de <= '0';
                l_valid <= '0';
                de_q <= '0';
                vs_q <= '0';
                x_cnt <= A0;
                width <= A0;
                line_cnt <= "00";
                fl_phase <= "00";
                fl_x <= A0;
                fl_first_row <= '0';
                s1_px <= '0';
                s1_end <= '0';
                s1_take <= '0';
                s1_emit <= '0';
                s1_first_row <= '0';
                s1_last_row <= '0';
                s1_first_col <= '0';
                s1_vs <= '0';
                s1_hs <= '0';
                s1_addr <= A0;
                s1_pix <= P0;
                w_c0 <= COL0;
                w_c1 <= COL0;
                w_c2 <= COL0;
                s2_emit <= '0';
                s2_first_row <= '0';
                s2_last_row <= '0';
                s2_first_col <= '0';
                s2_last_col <= '0';
                s2_vs <= '0';
                s2_hs <= '0';
                run2 <= '0';
                win <= (others => P0);
                w_vs <= '0';
                w_hs <= '0';
                w_de <= '0';
                w_valid <= '0';
                gx <= (others => '0');
                gy <= (others => '0');
                sum_sq <= (others => '0');
                addr <= (others => '0');
                dout <= (others => '0');
                d_vs <= (others => '0');
                d_hs <= (others => '0');
                d_de <= (others => '0');
                d_valid <= (others => '0');
            else
                -- luma
                luma <= luma_sum(15 downto 4);
                l_vs <= in_vsync;
                l_hs <= in_hsync;
                l_de <= in_de;
                l_valid <= in_valid;

                -- stage 0 state
                de_q <= l_de;
                vs_q <= l_vs;
                if take0 then
                    x_cnt <= x_cnt + 1;
                elsif l_de = '0' then
                    x_cnt <= A0;
                end if;
                if eol0 then
                    width <= x_cnt;
                    if line_cnt /= 2 then
                        line_cnt <= line_cnt + 1;
                    end if;
                end if;
                if vs_edge0 then
                    line_cnt <= "00";
                end if;
                case to_integer(fl_phase) is
                    when 0 =>
                        if fl_start0 then
                            if width = A1 then
                                fl_phase <= "10";
                            else
                                fl_phase <= "01";
                            end if;
                            fl_x <= A1;
                            fl_first_row <= '1' when line_cnt = 1 else '0';
                        end if;
                    when 1 =>
                        if fl_x = width - 1 then
                            fl_phase <= "10";
                        end if;
                        fl_x <= fl_x + 1;
                    when others =>
                        fl_phase <= "00";
                end case;

                -- stage 0 -> 1
                s1_px <= '1' when px0 else '0';
                s1_end <= '1' when end0 else '0';
                s1_take <= '1' when take0 else '0';
                s1_emit <= '1' when emit0 else '0';
                if fl_phase /= 0 then
                    s1_first_row <= fl_first_row;
                else
                    s1_first_row <= '1' when line_cnt = 1 else '0';
                end if;
                s1_last_row <= '1' when fl_px0 or fl_end0 else '0';
                s1_first_col <= '1' when first_col0 else '0';
                s1_vs <= '1' when l_vs = '1' and not (fl_px0 or fl_end0) else '0';
                s1_hs <= l_hs;
                s1_addr <= addr0;
                s1_pix <= luma;

                -- stage 1 -> 2
                if s1_px = '1' or s1_end = '1' then
                    w_c0 <= w_c1;
                    w_c1 <= w_c2;
                    w_c2 <= (col_top, lb1_q, col_bot);
                end if;
                s2_emit <= s1_emit;
                s2_first_row <= s1_first_row;
                s2_last_row <= s1_last_row;
                s2_first_col <= s1_first_col;
                s2_last_col <= s1_end;
                s2_vs <= s1_vs;
                s2_hs <= s1_hs;

                -- stage 2 -> 3
                if s2_emit = '1' then
                    run2 <= not s2_last_col;
                end if;
                w_vs <= s2_vs;
                w_hs <= s2_hs;
                w_de <= s2_emit or run2;
                w_valid <= s2_emit;
                if s2_emit = '1' then
                    for rr in 0 to 2 loop
                        win(3 * rr + 0) <= left(rr);
                        win(3 * rr + 1) <= w_c1(rr);
                        win(3 * rr + 2) <= right(rr);
                    end loop;
                end if;

                -- datapath
                gx <= signed(gx_pos - gx_neg);
                gy <= signed(gy_pos - gy_neg);
                sum_sq <= s_next;
                if sum_sq(28 downto 12) > 8191 then
                    addr <= to_unsigned(8191, 13);
                else
                    addr <= sum_sq(24 downto 12);
                end if;
                dout <= unsigned(ROOT_TABLE(to_integer(addr)));
                d_vs <= d_vs(2 downto 0) & w_vs;
                d_hs <= d_hs(2 downto 0) & w_hs;
                d_de <= d_de(2 downto 0) & w_de;
                d_valid <= d_valid(2 downto 0) & w_valid;
            end if;
        end if;
    end process;

    out_vsync <= d_vs(3);
    out_hsync <= d_hs(3);
    out_de <= d_de(3);
    out_valid <= d_valid(3);
    out_data <= std_logic_vector(dout);

end architecture rtl;
