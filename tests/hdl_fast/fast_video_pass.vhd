-- Video pass-through for the fast-path VHDL harness tests.
-- Latency: 1 clock. Every output is the input registered once; no filtering (out_data = in_data).
-- Reset: rst active high, synchronous; clears the control registers (data is left free).
library ieee;
use ieee.std_logic_1164.all;

entity fast_video_pass_vhd is
    generic (WIDTH : positive := 8);
    port (
        clk       : in  std_logic;
        rst       : in  std_logic;
        in_vsync  : in  std_logic;
        in_hsync  : in  std_logic;
        in_de     : in  std_logic;
        in_valid  : in  std_logic;
        in_data   : in  std_logic_vector(WIDTH - 1 downto 0);
        out_vsync : out std_logic;
        out_hsync : out std_logic;
        out_de    : out std_logic;
        out_valid : out std_logic;
        out_data  : out std_logic_vector(WIDTH - 1 downto 0)
    );
end entity;

architecture rtl of fast_video_pass_vhd is
begin
    process (clk)
    begin
        if rising_edge(clk) then
            if rst = '1' then
                out_vsync <= '0'; out_hsync <= '0'; out_de <= '0'; out_valid <= '0';
            else
                out_vsync <= in_vsync; out_hsync <= in_hsync; out_de <= in_de; out_valid <= in_valid;
            end if;
            out_data <= in_data;
        end if;
    end process;
end architecture;
