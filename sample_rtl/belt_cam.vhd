-- belt_cam (VHDL-2008): the conveyor camera chain for GHDL: belt_pattern_gen_v (the generator of
-- belt_pattern_gen.v, same scene, timing and gaps), edge_core (edge_core.vhd) at u_edge, and a marker;
-- belt_cam_tb runs FRAMES frames and stops parked in vertical sync. Dump with `--vcd=FILE`.
-- Analyse edge_root_table_pkg.vhd and edge_core.vhd first.

library ieee;
use ieee.std_logic_1164.all;
use ieee.numeric_std.all;

entity belt_pattern_gen_v is
    generic (H_ACT : natural := 32; H_FP : natural := 2; H_SW : natural := 2; H_BP : natural := 4;
             V_ACT : natural := 24; V_FP : natural := 1; V_SW : natural := 2; V_BP : natural := 1);
    port (clk, rst_n, run : in std_logic;
          vs, hs, de, pix_valid : out std_logic;
          rgb : out std_logic_vector(23 downto 0);
          frame_no : out unsigned(15 downto 0));
end entity;

architecture rtl of belt_pattern_gen_v is
    constant V_TOT : natural := V_SW + V_BP + V_ACT + V_FP;
    constant H_TOT : natural := H_ACT + H_FP + H_SW + H_BP;
    signal col, row, x : natural range 0 to 4095 := 0;
    signal lfsr : std_logic_vector(15 downto 0) := x"ACE1";
    signal fno : unsigned(15 downto 0) := (others => '0');
begin
    frame_no <= fno;
    process (clk)
        variable act_row, in_act, gap : boolean;
        variable y, bx, p1 : natural;
        variable scene : unsigned(23 downto 0);
        variable fb : std_logic;
    begin
        if rising_edge(clk) then
            act_row := row >= V_SW + V_BP and row < V_SW + V_BP + V_ACT;
            y := (row - (V_SW + V_BP)) mod 4096;
            in_act := act_row and x < H_ACT;
            gap := lfsr(2 downto 0) = "000" and in_act;
            bx := (x + 2 * to_integer(fno(9 downto 0))) mod 4096;
            p1 := (to_integer(fno(7 downto 0)) + 3) mod H_ACT;
            if x + 2 >= H_ACT then
                scene := x"E0C020";
            elsif x >= p1 + 3 and x < p1 + 7 and y >= 6 and y < 10 then
                scene := x"FFFFFF";   -- the white shipping label
            elsif x >= p1 and x < p1 + 9 and y >= 4 and y < 12 then
                scene := x"000000";   -- the black parcel
            elsif x + 5 >= 2 * to_integer(fno(5 downto 0)) and x < 2 * to_integer(fno(5 downto 0)) + 2 and y >= 14 and y < 21 then
                scene := to_unsigned(30, 8) & to_unsigned((70 + x) mod 256, 8) & to_unsigned(200, 8);
            elsif bx mod 8 < 2 then
                scene := x"404448";
            else
                scene := to_unsigned((120 + y) mod 256, 8) & to_unsigned((124 + y) mod 256, 8) & to_unsigned((128 + y) mod 256, 8);
            end if;
            if rst_n = '0' then
                col <= 0; row <= 0; x <= 0; lfsr <= x"ACE1"; fno <= (others => '0');
                vs <= '0'; hs <= '0'; de <= '0'; pix_valid <= '0'; rgb <= (others => '0');
            elsif run = '0' and row = 0 and col = 0 then
                vs <= '1'; hs <= '0'; de <= '0'; pix_valid <= '0';   -- parked in vertical sync
            else
                fb := lfsr(15) xor lfsr(13) xor lfsr(12) xor lfsr(10);
                lfsr <= lfsr(14 downto 0) & fb;
                vs <= '1' when row < V_SW else '0';
                hs <= '1' when col >= H_ACT + H_FP and col < H_ACT + H_FP + H_SW else '0';
                de <= '1' when in_act else '0';
                pix_valid <= '1' when in_act and not gap else '0';
                rgb <= std_logic_vector(scene) when in_act and not gap else (others => '0');
                if in_act and not gap then
                    x <= x + 1;
                end if;
                if gap then
                    null;  -- the column is held: the line is one clock longer
                elsif col + 1 = H_TOT then
                    col <= 0; x <= 0;
                    if row + 1 = V_TOT then
                        row <= 0; fno <= fno + 1;
                    else
                        row <= row + 1;
                    end if;
                else
                    col <= col + 1;
                end if;
            end if;
        end if;
    end process;
end architecture;

library ieee;
use ieee.std_logic_1164.all;
use ieee.numeric_std.all;

entity belt_cam_tb is
    generic (FRAMES : natural := 3);
end entity;

architecture sim of belt_cam_tb is
    signal clk : std_logic := '0';
    signal rst_n, run : std_logic := '0';
    signal g_vs, g_hs, g_de, g_valid, e_vs, e_hs, e_de, e_valid, rst : std_logic;
    signal g_rgb : std_logic_vector(23 downto 0);
    signal e_mag : std_logic_vector(7 downto 0);
    signal frames_made : unsigned(15 downto 0);
    signal marks : natural := 0;
    signal done : boolean := false;
begin
    clk <= not clk after 5 ns when not done;
    rst <= not rst_n;
    u_gen : entity work.belt_pattern_gen_v
        port map (clk => clk, rst_n => rst_n, run => run, vs => g_vs, hs => g_hs, de => g_de,
                  pix_valid => g_valid, rgb => g_rgb, frame_no => frames_made);
    u_edge : entity work.edge_core
        port map (clk => clk, rst => rst, in_vsync => g_vs, in_hsync => g_hs, in_de => g_de, in_valid => g_valid,
                  in_data => g_rgb, out_vsync => e_vs, out_hsync => e_hs, out_de => e_de, out_valid => e_valid,
                  out_data => e_mag);
    u_mark : process (clk)
    begin
        if rising_edge(clk) and e_de = '1' and e_valid = '1' and unsigned(e_mag) >= 48 then
            marks <= marks + 1;
        end if;
    end process;
    stim : process
    begin
        for i in 1 to 4 loop
            wait until rising_edge(clk);
        end loop;
        rst_n <= '1';
        run <= '1';
        wait until frames_made = FRAMES;
        run <= '0';
        for i in 1 to 200 loop
            wait until rising_edge(clk);
        end loop;
        report "belt_cam_tb: " & integer'image(FRAMES) & " frames, " & integer'image(marks) & " marked pixels";
        done <= true;
        wait;
    end process;
end architecture;
