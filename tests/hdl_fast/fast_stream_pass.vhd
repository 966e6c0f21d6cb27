-- Two-slot elastic buffer on a valid/ready pixel stream, for the VHDL stream harness tests.
-- Latency: 1 clock from an accepted input beat to dout_vld (when the buffer was empty).
-- Holds up to two beats: din_rdy is high while a slot is free, so the input side sees back-pressure
-- one beat after the output side stalls. {dout_pix, dout_first, dout_last} = the stored
-- {din_pix, din_first, din_last}; no filtering. Reset: rst_i active high, synchronous; empties both slots.
library ieee;
use ieee.std_logic_1164.all;

entity fast_stream_pass_vhd is
    generic (
        PIX_BITS : positive := 8
    );
    port (
        clk_i      : in  std_logic;
        rst_i      : in  std_logic;
        din_vld    : in  std_logic;
        din_rdy    : out std_logic;
        din_pix    : in  std_logic_vector(PIX_BITS - 1 downto 0);
        din_first  : in  std_logic;
        din_last   : in  std_logic;
        dout_vld   : out std_logic;
        dout_rdy   : in  std_logic;
        dout_pix   : out std_logic_vector(PIX_BITS - 1 downto 0);
        dout_first : out std_logic;
        dout_last  : out std_logic
    );
end entity;

architecture rtl of fast_stream_pass_vhd is
    subtype beat_t is std_logic_vector(PIX_BITS + 1 downto 0);
    signal head, spare : beat_t;
    signal head_full, spare_full : std_logic := '0';
begin
    din_rdy <= not spare_full;
    dout_vld <= head_full;
    dout_pix <= head(PIX_BITS - 1 downto 0);
    dout_first <= head(PIX_BITS);
    dout_last <= head(PIX_BITS + 1);

    slots : process (clk_i)
        variable take, give : boolean;
        variable incoming : beat_t;
    begin
        if rising_edge(clk_i) then
            if rst_i = '1' then
                head_full <= '0';
                spare_full <= '0';
            else
                take := din_vld = '1' and spare_full = '0';
                give := head_full = '1' and dout_rdy = '1';
                incoming := din_last & din_first & din_pix;
                if give then
                    if spare_full = '1' then
                        head <= spare;
                        spare_full <= '0';
                        if take then
                            spare <= incoming;
                            spare_full <= '1';
                        end if;
                    elsif take then
                        head <= incoming;
                    else
                        head_full <= '0';
                    end if;
                elsif take then
                    if head_full = '1' then
                        spare <= incoming;
                        spare_full <= '1';
                    else
                        head <= incoming;
                        head_full <= '1';
                    end if;
                end if;
            end if;
        end if;
    end process;
end architecture;
